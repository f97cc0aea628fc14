#!/usr/bin/env bash
# tauscan's benchmark: one run prints, for generated trees of the given sizes and for any
# real trees named after `--`, the full check's time against a bare tree-sitter parse of
# the same files (walk, parse every file once in parallel, keep nothing: the floor), the
# parse-with-lowering pass, peak memory of each, the speedup of 2 threads over 1, and a
# warm --cache run against a cold one. Ratios within one run are what count; absolute
# times depend on the machine.
#
# usage: bench/run.sh [SIZES...] [-- TREE...]   (default sizes: 10000 100000 1000000 lines)
set -euo pipefail
cd "$(dirname "$0")/.."
sizes=()
trees=()
while [ $# -gt 0 ]; do
    if [ "$1" = "--" ]; then
        shift
        trees=("$@")
        break
    fi
    sizes+=("$1")
    shift
done
[ ${#sizes[@]} -gt 0 ] || [ ${#trees[@]} -gt 0 ] || sizes=(10000 100000 1000000)
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

row() {
    local name=$1 tree=$2
    local lines bare bare_rss parse check rss one cached
    lines=$(find "$tree" -name '*.[ch]' -print0 | xargs -0 cat | wc -l)
    read -r bare bare_rss < <(measure "$bin" debug bare-parse "$tree")
    read -r parse _ < <(measure "$bin" debug parse-only "$tree")
    read -r check rss < <(measure "$bin" check --format json --spec /dev/null "$tree")
    read -r one _ < <(RAYON_NUM_THREADS=1 measure "$bin" check --format json --spec /dev/null "$tree")
    # The cache: filled by one run, then timed on the unchanged tree.
    local cache="$work/cache-$(basename "$tree")"
    rm -rf "$cache"
    "$bin" check --format json --spec /dev/null --cache "$cache" "$tree" > "$work/filling.json" 2>/dev/null || true
    read -r cached _ < <(measure "$bin" check --format json --spec /dev/null --cache "$cache" "$tree")
    # The cache changes the time, never the result: the same JSON without it, filling it
    # and reading it, on one thread and on two, or the benchmark stops here.
    "$bin" check --format json --spec /dev/null "$tree" > "$work/plain.json" 2>/dev/null || true
    RAYON_NUM_THREADS=1 "$bin" check --format json --spec /dev/null "$tree" > "$work/one.json" 2>/dev/null || true
    "$bin" check --format json --spec /dev/null --cache "$cache" "$tree" > "$work/reading.json" 2>/dev/null || true
    for other in filling one reading; do
        if ! cmp -s "$work/plain.json" "$work/$other.json"; then
            echo "bench: $name: the JSON of the $other run differs from the plain run's" >&2
            exit 1
        fi
    done
    printf '%-26s %9s %8.3f %8.3f %8.3f %7.2f %8.1f %8.1f %8.3f %8.2f %8.3f %7.2f\n' \
        "$name" "$lines" "$bare" "$parse" "$check" "$(echo "$check / $bare" | bc -l)" \
        "$(echo "$bare_rss / 1024" | bc -l)" "$(echo "$rss / 1024" | bc -l)" \
        "$one" "$(echo "$one / $check" | bc -l)" "$cached" "$(echo "$check / $cached" | bc -l)"
}

printf '%-26s %9s %8s %8s %8s %7s %8s %8s %8s %8s %8s %7s\n' tree lines bare_s parse_s check_s ratio bare_MB rss_MB t1_s speedup cached_s gain
for n in "${sizes[@]}"; do
    tree="$work/tree-$n"
    [ -d "$tree" ] || python3 bench/generate.py "$tree" "$n" > /dev/null
    row "generated-$n" "$tree"
done
for tree in "${trees[@]}"; do
    row "$(basename "$tree")" "$tree"
done
