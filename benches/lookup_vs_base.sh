#!/usr/bin/env bash
# lookup_vs_base.sh BASE_BALER TSV [NEW_BALER]: issue 8's lookup figure in one run. Packs TSV with
# each binary (its own default layout), takes every 20th source phrase of the table (at most
# 20,000, in byte order), and times `baler lookup` of that list, whole process, A (new) against B
# (base) pair by pair with farm-bench; prints the medians, the A/B ratio and both files' bytes per
# pair. NEW_BALER defaults to this checkout's release build. Scratch: $BENCH_TMP or a temp dir.
set -euo pipefail
BASE=$1; TSV=$2
NEW=${3:-$(cd "$(dirname "$0")/.." && pwd)/target/release/baler}
W=${BENCH_TMP:-$(mktemp -d)}
"$NEW" pack -q "$TSV" -o "$W/new.bale"
"$BASE" pack -q "$TSV" -o "$W/base.bale" 2>/dev/null || "$BASE" pack "$TSV" -o "$W/base.bale"
grep -v '^#' "$TSV" | tail -n +2 | cut -f1 | uniq | awk 'NR%20==0' | head -20000 >"$W/phrases.txt"
pairs=$(( $(grep -vc '^#' "$TSV") - 1 ))
for f in new base; do
  printf '%-5s %s bytes, %s bytes/pair\n' "$f" "$(stat -c %s "$W/$f.bale")" \
    "$(python3 -c "print(f'{$(stat -c %s "$W/$f.bale") / $pairs:.2f}')")"
done
farm-bench -n 5 --vs "sh -c 'exec $BASE lookup $W/base.bale < $W/phrases.txt > /dev/null'" \
  -- sh -c "exec $NEW lookup $W/new.bale < $W/phrases.txt > /dev/null" | grep -E "A/B|cpu s|peak"
echo "goal (issue 8): A/B cpu <= 1.0"
