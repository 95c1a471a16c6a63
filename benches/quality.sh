#!/usr/bin/env bash
# quality.sh [PROJECT_DIR]: translation quality and speed on the real corpus, in one run.
# Extracts the full table from train (en→fr), builds a 4-gram LM on train.fr, decodes the
# 2,000 test sentences with the greedy baseline and with the decoder, then prunes with
# alpha+epsilon, alpha-epsilon and top-k 20 and reports BLEU/chrF against packed size.
# Scratch space: $BENCH_TMP (default: a folder under the system's temporary directory).
set -euo pipefail
HERE=$(cd "$(dirname "$0")" && pwd)
PROJECT=$(cd "${1:-$HERE/..}" && pwd)
W=${BENCH_TMP:-$(python3 -c 'import tempfile; print(tempfile.gettempdir())')/baler-quality}
THREADS=${THREADS:-2}
mkdir -p "$W"
cd "$PROJECT"
cargo build --release --quiet
B=$PROJECT/target/release/baler
DATA=$PROJECT/../shared/data
[ -d "$DATA" ] || DATA=$PROJECT/../../shared/data
[ -s "$W/train.align" ] || zstd -dc "$DATA/catalogs-en-fr.tar.zst" | tar -x -C "$W"
now() { date +%s.%N; }
secs() { python3 -c "import sys; print(f'{float(sys.argv[2]) - float(sys.argv[1]):.2f}')" "$@"; }

[ -s "$W/table.tsv" ] || "$B" extract --source "$W/train.en" --target "$W/train.fr" \
  --alignment "$W/train.align" --max-length 7 -o "$W/table.tsv" 2>/dev/null
"$B" pack "$W/table.tsv" -o "$W/full.bale" -q 2>/dev/null || "$B" pack "$W/table.tsv" -o "$W/full.bale" 2>/dev/null

t0=$(now); "$B" lm build "$W/train.fr" -o "$W/fr.balm" --order 4 -q; t1=$(now)
echo "LM build, 4-gram, train.fr: $(secs "$t0" "$t1") s (goal < 30 s)"

t0=$(now); "$B" translate "$W/full.bale" --lm "$W/fr.balm" --greedy --input "$W/test.en" -o "$W/greedy.fr" -q; t1=$(now)
"$B" translate "$W/full.bale" --lm "$W/fr.balm" --threads "$THREADS" --input "$W/test.en" -o "$W/full.fr" -q ${WEIGHTS:+--weights "$WEIGHTS"}
t2=$(now)
echo "greedy baseline: $(secs "$t0" "$t1") s; decoder, $THREADS threads: $(secs "$t1" "$t2") s for 2,000 sentences (goal < 60 s)"
"$B" evaluate "$W/greedy.fr" "$W/full.fr" --reference "$W/test.fr" --samples 1000

printf '%-16s %12s %8s %8s  %s\n' setting bytes BLEU chrF "pruned - full, BLEU, 95% bootstrap interval"
size=$(stat -c %s "$W/full.bale")
read -r b c < <("$B" evaluate "$W/full.fr" --reference "$W/test.fr" --json | python3 -c 'import json,sys; s=json.load(sys.stdin)["systems"][0]; print(s["bleu"], s["chrf"])')
printf '%-16s %12s %8.2f %8.2f\n' full "$size" "$b" "$c"
for setting in alpha+epsilon alpha-epsilon top-k-20; do
  case $setting in
    top-k-20) args=(--top-k 20) ;;
    *) args=(--significance "$setting") ;;
  esac
  "$B" prune "$W/table.tsv" "${args[@]}" -o "$W/$setting.bale" -q
  "$B" translate "$W/$setting.bale" --lm "$W/fr.balm" --threads "$THREADS" --input "$W/test.en" -o "$W/$setting.fr" -q ${WEIGHTS:+--weights "$WEIGHTS"}
  size=$(stat -c %s "$W/$setting.bale")
  read -r b c p lo hi < <("$B" evaluate "$W/full.fr" "$W/$setting.fr" --reference "$W/test.fr" --json --samples 1000 | python3 -c '
import json, sys
r = json.load(sys.stdin); s = r["systems"][1]; bs = r["bootstrap"]
print(s["bleu"], s["chrf"], bs["bleu_p"], *bs["bleu_delta_interval"])')
  printf '%-16s %12s %8.2f %8.2f  [%.2f, %.2f], share of resamples with pruned <= full: %.3f\n' "$setting" "$size" "$b" "$c" "$lo" "$hi" "$p"
done

# A sweep of 6 settings (significance × top-k) with quality, timed whole (goal < 10 minutes on
# 2 cores): prune and pack each setting, decode the test set with each table and the base.
if [ "${SWEEP:-1}" != 0 ]; then
  rm -rf "$W/sweep"
  t0=$(now)
  "$B" sweep "$W/table.tsv" --test "$W/test.en" --reference "$W/test.fr" --lm "$W/fr.balm" \
    --vary significance=alpha+epsilon,alpha-epsilon,20 --vary top-k=20,100 -o "$W/sweep" -q \
    ${WEIGHTS:+--weights "$WEIGHTS"}
  t1=$(now)
  echo "sweep of 6 settings with BLEU and chrF: $(secs "$t0" "$t1") s (goal < 600 s)"
  python3 - "$W/sweep/sweep.csv" <<'PY'
import csv, sys
rows = list(csv.DictReader(open(sys.argv[1], newline="")))
print(f"{'setting':<40} {'bytes':>10} {'BLEU':>7} {'chrF':>7} {'ΔBLEU':>7}  95% interval")
for r in rows:
    print(f"{r['setting']:<40} {int(r['file_bytes']):>10} {float(r['bleu']):>7.2f} "
          f"{float(r['chrf']):>7.2f} {float(r['bleu_delta']):>+7.2f}  "
          f"[{float(r['bleu_delta_low']):+.2f}, {float(r['bleu_delta_high']):+.2f}]")
PY
fi
