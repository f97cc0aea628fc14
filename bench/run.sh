#!/usr/bin/env bash
# tauscan's benchmark: one run prints, at three tree sizes, the full check's time against a
# parse-only pass over the same files (same walker, same thread pool), throughput, peak
# memory, and the speedup of 2 threads over 1. Ratios within one run are what count; the
# absolute times depend on the machine.
#
# usage: bench/run.sh [SIZES...]      (default: 10000 100000 1000000 lines)
set -euo pipefail
cd "$(dirname "$0")/.."
sizes=("${@:-10000 100000 1000000}")
# shellcheck disable=SC2206
sizes=(${sizes[@]})
work=${TAUSCAN_BENCH_DIR:-/tmp/tauscan-bench}
mkdir -p "$work"

cargo build --release --quiet
bin=target/release/tauscan

# Best of three wall-clock seconds, and the peak RSS (KiB) of the best run.
measure() {
    local best="" rss=0
    for _ in 1 2 3; do
        local start end t
        start=$(date +%s.%N)
        /usr/bin/time -f '%M' -o "$work/rss" "$@" > /dev/null 2>&1 || true
        end=$(date +%s.%N)
        t=$(echo "$end - $start" | bc -l)
        if [ -z "$best" ] || [ "$(echo "$t < $best" | bc -l)" = 1 ]; then
            best=$t
            rss=$(tail -n 1 "$work/rss")
        fi
    done
    echo "$best $rss"
}

printf '%-9s %9s %9s %7s %9s %11s %9s %9s %8s %9s %8s\n' lines parse_s check_s ratio MB/s lines/s rss_MB t1_s speedup cached_s gain
for n in "${sizes[@]}"; do
    tree="$work/tree-$n"
    [ -d "$tree" ] || python3 bench/generate.py "$tree" "$n" > /dev/null
    bytes=$(find "$tree" -name '*.[ch]' -print0 | xargs -0 cat | wc -c)
    lines=$(find "$tree" -name '*.[ch]' -print0 | xargs -0 cat | wc -l)
    read -r parse _ < <(measure "$bin" debug parse-only "$tree")
    read -r check rss < <(measure "$bin" check --format json "$tree")
    read -r one _ < <(RAYON_NUM_THREADS=1 measure "$bin" check --format json "$tree")
    # The parse cache: filled by one run, then timed on the unchanged tree.
    cache="$work/cache-$n"
    rm -rf "$cache"
    "$bin" check --format json --cache "$cache" "$tree" > /dev/null 2>&1 || true
    read -r cached _ < <(measure "$bin" check --format json --cache "$cache" "$tree")
    printf '%-9s %9.3f %9.3f %7.2f %9.2f %11.0f %9.1f %9.3f %8.2f %9.3f %8.2f\n' \
        "$lines" "$parse" "$check" "$(echo "$check / $parse" | bc -l)" \
        "$(echo "$bytes / 1000000 / $check" | bc -l)" "$(echo "$lines / $check" | bc -l)" \
        "$(echo "$rss / 1024" | bc -l)" "$one" "$(echo "$one / $check" | bc -l)" \
        "$cached" "$(echo "$check / $cached" | bc -l)"
done
