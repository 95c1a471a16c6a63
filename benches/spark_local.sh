#!/bin/sh
# The Spark driver in local mode against single-machine `baler extract` on the real corpus, in
# one run: medians of RUNS (default 3) alternating runs, byte-identity, and the bytes the
# stages exchange per sentence pair (Spark's shuffle-write metric and the driver's own count).
#
#   sh benches/spark_local.sh            # needs target/release/baler and pyspark on PATH's python
#   MASTER='local[2]' PARTITIONS=4 RANGES=4 RUNS=3 sh benches/spark_local.sh
set -eu
ROOT=$(cd "$(dirname "$0")/.." && pwd)
BALER=${BALER:-$ROOT/target/release/baler}
RUNS=${RUNS:-3}
MASTER=${MASTER:-local[2]}
PARTITIONS=${PARTITIONS:-4}
RANGES=${RANGES:-4}
W=${BENCH_TMP:-/tmp/baler-spark-bench}
mkdir -p "$W"
DATA=$ROOT/../shared/data
[ -d "$DATA" ] || DATA=$ROOT/../../shared/data
[ -s "$W/train.align" ] || zstd -dc "$DATA/catalogs-en-fr.tar.zst" | tar -x -C "$W"
SUBMIT=$(command -v spark-submit) || { echo "spark-submit not on PATH (pip install pyspark)" >&2; exit 2; }
CORPUS="--source $W/train.en --target $W/train.fr --alignment $W/train.align"

median() { sort -n | awk '{a[NR]=$1} END {print (NR%2 ? a[(NR+1)/2] : (a[NR/2]+a[NR/2+1])/2)}'; }
now() { date +%s.%N; }

: > "$W/single.times"
: > "$W/spark.times"
echo "load before: $(uptime)"
for k in $(seq "$RUNS"); do
    t0=$(now)
    # shellcheck disable=SC2086
    "$BALER" extract -q $CORPUS -o "$W/single.tsv"
    t1=$(now)
    # shellcheck disable=SC2086
    "$SUBMIT" --master "$MASTER" "$ROOT/spark/baler_spark.py" --baler "$BALER" $CORPUS \
        --partitions "$PARTITIONS" --ranges "$RANGES" -o "$W/spark.tsv" \
        --metrics "$W/metrics-$k.json" 2>"$W/spark-$k.log"
    t2=$(now)
    echo "$t1 - $t0" | bc >> "$W/single.times"
    echo "$t2 - $t1" | bc >> "$W/spark.times"
    cmp -s "$W/single.tsv" "$W/spark.tsv" || { echo "run $k: the Spark table differs" >&2; exit 1; }
done
echo "load after: $(uptime)"
single=$(median < "$W/single.times")
spark=$(median < "$W/spark.times")
echo "single machine (baler extract, all cores): median $single s of $(tr '\n' ' ' < "$W/single.times")"
echo "Spark $MASTER, $PARTITIONS partitions, $RANGES ranges (spark-submit, JVM start included): median $spark s of $(tr '\n' ' ' < "$W/spark.times")"
echo "ratio Spark / single: $(echo "scale=2; $spark / $single" | bc)"
echo "tables byte-identical: yes"
python3 - "$W/metrics-1.json" <<'EOF'
import json, sys
m = json.load(open(sys.argv[1]))
pairs = 47597  # sentence pairs of train.* (all kept at --max-sentence-length 100)
x = m["bytes_exchanged"]
total = sum(x.values())
print("steps (run 1): " + ", ".join(f"{k} {v} s" for k, v in m.items() if k.startswith("seconds")))
print(f"bytes exchanged (run 1): count runs {x['runs']}, target totals {x['totals']}, "
      f"tallies {x['tallies']}; total {total} = {total / pairs:.0f} bytes per sentence pair")
print(f"Spark shuffle-write bytes: {m['shuffle_write_bytes_spark']} = "
      f"{(m['shuffle_write_bytes_spark'] or 0) / pairs:.0f} bytes per sentence pair")
EOF
