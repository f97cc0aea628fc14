#!/usr/bin/env bash
# tauscan on real firmware: runs `tauscan list` over each tree of the development corpus,
# with a time and memory limit, prints per tree the wall time, the peak memory and the notes
# other than unparsed regions (counted: regions the grammar could not read, conditionals
# read through one branch; listed: budgets reached, chains cut), then scores the saved outputs
# with the corpus's score.py (recall, precision, alpha right).
#
# usage: bench/realworld.sh TREES... [-- SCORE_OPTIONS...]
#   TREES          folders holding the unpacked trees (OWNER+NAME/ each), as unpack.sh
#                  leaves them; or single trees (an OWNER+NAME folder)
#   SCORE_OPTIONS  passed on to score.py (--verbose, --repo OWNER/NAME)
# The corpus (labels/, score.py) is ../shared/realworld-dev beside the checkout, or
# $TAUSCAN_CORPUS.
set -euo pipefail
here=$(cd "$(dirname "$0")/.." && pwd)
corpus=${TAUSCAN_CORPUS:-$here/../shared/realworld-dev}
limit_s=${TAUSCAN_TREE_SECONDS:-300}
limit_kb=${TAUSCAN_TREE_KB:-8000000}

trees=()
score_options=()
while [ $# -gt 0 ]; do
    if [ "$1" = "--" ]; then
        shift
        score_options=("$@")
        break
    fi
    trees+=("$1")
    shift
done
if [ ${#trees[@]} -eq 0 ]; then
    sed -n '2,13p' "$0" | sed 's/^# \{0,1\}//' >&2
    exit 2
fi
[ -f "$corpus/score.py" ] || { echo "realworld.sh: no score.py in $corpus" >&2; exit 2; }

(cd "$here" && cargo build --release --quiet)
bin=$here/target/release/tauscan
out=$(mktemp -d "${TMPDIR:-/tmp}/tauscan-realworld.XXXXXX")
trap 'rm -rf "$out"' EXIT

# Every OWNER+NAME folder named or held by the arguments.
repos=()
for t in "${trees[@]}"; do
    t=$(cd "$t" && pwd)
    case "$(basename "$t")" in
        *+*) repos+=("$t") ;;
        *) for r in "$t"/*+*/; do [ -d "$r" ] && repos+=("${r%/}"); done ;;
    esac
done

printf '%-32s %8s %8s %8s  %s\n' tree seconds peak_MB unparsed 'other notes'
failed=0
for repo in "${repos[@]}"; do
    name=$(basename "$repo")
    set +e
    (
        ulimit -v "$limit_kb"
        exec /usr/bin/time -f '%e %M' -o "$out/$name.time" \
            timeout "$limit_s" "$bin" list --format json "$repo"
    ) > "$out/$name.json" 2> "$out/$name.err"
    status=$?
    set -e
    # 0: no finding, 1: findings; anything else is a failure of the run itself.
    if [ "$status" -gt 1 ]; then
        echo "$name: tauscan exited with $status (killed by the limit of ${limit_s}s / ${limit_kb} kB?)"
        tail -n 3 "$out/$name.err"
        failed=1
        continue
    fi
    python3 - "$out/$name.json" "$out/$name.time" "$name" <<'PY'
import json, sys
doc = json.load(open(sys.argv[1]))
seconds, kb = open(sys.argv[2]).read().split()[-2:]
notes = doc.get("notes", [])
# Regions of C the grammar could not read, whole or in one branch of a conditional.
unparsed = [
    n for n in notes
    if "could not be parsed" in n["message"] or "only one of its branches" in n["message"]
]
other = [n for n in notes if n not in unparsed]
print(f"{sys.argv[3]:32} {float(seconds):8.1f} {int(kb) / 1024:8.0f} {len(unparsed):8}  {len(other)}")
for n in other:
    print(f"    {n['file']}:{n['line']}: {n['message']}")
PY
done

echo
python3 "$corpus/score.py" "${repos[0]%/*}" --json-dir "$out" "${score_options[@]}"
exit $failed
