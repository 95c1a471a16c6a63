#!/usr/bin/env bash
# extract_realdata.sh [BASELINE_BALER]: `baler extract` on the real corpus against the plain
# Python extractor (../shared/bench/extract_reference.py), timed side by side in one run, the
# median of RUNS (default 3) runs each. Prints the speed-up over Python (goal >= 20), the
# speed-up from 1 to 2 threads, and, given a baseline binary (e.g. today's main), its time and
# whether its output is byte-identical to this build's at both thread counts.
# Scratch space: $BENCH_TMP (default /tmp/baler-extract-realdata).
set -euo pipefail
ROOT=$(cd "$(dirname "$0")/.." && pwd)
SHARED=$(cd "${SHARED:-$ROOT/../../shared}" && pwd)  # the shared bench and data folders
W=${BENCH_TMP:-/tmp/baler-extract-realdata}
RUNS=${RUNS:-3}
BASE=${1:-}
mkdir -p "$W"
cd "$ROOT" && cargo build --release --quiet
B=$ROOT/target/release/baler
[ -s "$W/train.align" ] || zstd -dc "$SHARED/data/catalogs-en-fr.tar.zst" | tar -x -C "$W"
C=(--source "$W/train.en" --target "$W/train.fr" --alignment "$W/train.align" --max-length 7)
t() { local s e; s=$(date +%s.%N); "$@" >/dev/null 2>&1; e=$(date +%s.%N); python3 -c "print($e - $s)"; }
median() { python3 -c "import statistics, sys; print(f'{statistics.median(map(float, sys.argv[1:])):.2f}')" "$@"; }
py=(); one=(); two=(); base=()
for _ in $(seq "$RUNS"); do
  py+=("$(t python3 "$SHARED/bench/extract_reference.py" "$W/train.en" "$W/train.fr" "$W/train.align" 7 "$W/reference.tsv")")
  one+=("$(t "$B" extract -q "${C[@]}" --threads 1 -o "$W/one.tsv")")
  two+=("$(t "$B" extract -q "${C[@]}" --threads 2 -o "$W/two.tsv")")
  [ -z "$BASE" ] || base+=("$(t "$BASE" extract -q "${C[@]}" --threads 2 -o "$W/base.tsv")")
done
P=$(median "${py[@]}"); O=$(median "${one[@]}"); T=$(median "${two[@]}")
printf '%-36s %s s\n' "plain Python reference" "$P"
printf '%-36s %s s\n' "baler extract, 1 thread" "$O"
printf '%-36s %s s\n' "baler extract, 2 threads" "$T"
printf '%-36s %s\n' "speed-up over Python (goal >= 20)" "$(python3 -c "print(f'{$P / $T:.1f}x')")"
printf '%-36s %s\n' "speed-up 1 -> 2 threads" "$(python3 -c "print(f'{$O / $T:.2f}x')")"
cmp -s "$W/one.tsv" "$W/two.tsv" && echo "1 and 2 threads: byte-identical" || echo "1 and 2 threads: DIFFER"
if [ -n "$BASE" ]; then
  B0=$(median "${base[@]}")
  printf '%-36s %s s (%s)\n' "baseline extract, 2 threads" "$B0" "$(python3 -c "print(f'{$B0 / $T:.1f}x slower')")"
  cmp -s "$W/base.tsv" "$W/two.tsv" && echo "baseline output: byte-identical" || echo "baseline output: DIFFERS"
fi
"$B" extract "${C[@]}" --threads 2 -o "$W/two.tsv" 2>&1 | sed -n 's/.*pass(es); /steps: /p'
