#!/bin/sh
# throughput.sh: lookup throughput of the C ABI and of the Python module against the Rust API,
# side by side in one run, on a table built from the real corpus (catalogs-en-fr), plus the
# sizes app developers count (shared and static library, wheel).
#
#   sh capi/bench/throughput.sh            (from the repository root; several minutes the
#                                           first time, which extracts and packs the table)
#
# Scratch space: $BENCH_TMP (default /tmp/baler-embed-bench); corpus: $BALER_CORPUS (default
# ../shared/data/catalogs-en-fr.tar.zst beside the repository, else /work/shared/data/...).
# The table is built as /work/shared/bench/realdata.sh builds it: `baler extract` with phrases
# up to 7 tokens, the four scores kept, `baler pack` with default settings. The queries are
# 10,000 distinct source phrases of the table sampled with a fixed seed. Each program times
# ROUNDS passes over the queries after a warm-up pass; the three programs run in turn TRIOS
# times, and the medians are compared.
set -eu
cd "$(dirname "$0")/../.."
ROOT=$PWD
W=${BENCH_TMP:-/tmp/baler-embed-bench}
ROUNDS=${ROUNDS:-5}
TRIOS=${TRIOS:-3}
mkdir -p "$W"
CORPUS=${BALER_CORPUS:-$ROOT/../shared/data/catalogs-en-fr.tar.zst}
[ -f "$CORPUS" ] || CORPUS=/work/shared/data/catalogs-en-fr.tar.zst

cargo build --release --quiet --locked -p baler -p baler-capi
cargo build --release --quiet --locked -p baler-capi --example lookup_rate
B=$ROOT/target/release/baler
if [ ! -s "$W/t.bale" ]; then
    [ -s "$W/train.align" ] || zstd -dc "$CORPUS" | tar -x -C "$W"
    "$B" extract --source "$W/train.en" --target "$W/train.fr" --alignment "$W/train.align" \
        --max-length 7 -o "$W/table.tsv" 2>/dev/null
    python3 - "$W/table.tsv" "$W/in.tsv" <<'PY'
import sys
cols = ["source", "target", "p_t_given_s", "p_s_given_t", "lex_t_given_s", "lex_s_given_t"]
with open(sys.argv[1], encoding="utf-8") as fh, open(sys.argv[2], "w", encoding="utf-8") as out:
    idx = None
    for line in fh:
        if idx is None:
            if line.startswith("#"):
                out.write(line)
                continue
            head = line.rstrip("\n").split("\t")
            idx = [head.index(c) for c in cols]
            out.write("\t".join(cols) + "\n")
            continue
        f = line.rstrip("\n").split("\t")
        out.write("\t".join(f[i] for i in idx) + "\n")
PY
    "$B" pack "$W/in.tsv" -o "$W/t.bale" 2>/dev/null
fi
if [ ! -s "$W/queries.txt" ]; then
    "$B" dump "$W/t.bale" | python3 -c '
import random, sys
src = sorted({l.split("\t", 1)[0] for l in sys.stdin if not l.startswith("#")} - {"source"})
sys.stdout.write("\n".join(random.Random(5).sample(src, 10000)) + "\n")' >"$W/queries.txt"
fi

cc -std=c11 -O2 -Iinclude capi/bench/lookup_rate.c -Ltarget/release -lbaler \
    -Wl,-rpath,"$ROOT/target/release" -o "$W/lookup_rate_c"
[ -x "$W/venv/bin/python" ] || python3 -m venv "$W/venv"
"$W/venv/bin/python" -m pip install -q "maturin>=1.5,<2"
rm -rf "$W/wheels"
"$W/venv/bin/maturin" build --quiet --release --locked -m python/Cargo.toml -o "$W/wheels" 2>/dev/null
"$W/venv/bin/python" -m pip install -q --force-reinstall "$W"/wheels/baler-*.whl

: >"$W/rates.tsv"
i=0
while [ "$i" -lt "$TRIOS" ]; do
    target/release/examples/lookup_rate "$W/t.bale" "$W/queries.txt" "$ROUNDS" | tee -a "$W/rates.tsv"
    "$W/lookup_rate_c" "$W/t.bale" "$W/queries.txt" "$ROUNDS" | tee -a "$W/rates.tsv"
    "$W/venv/bin/python" capi/bench/lookup_rate.py "$W/t.bale" "$W/queries.txt" "$ROUNDS" \
        | tee -a "$W/rates.tsv"
    i=$((i + 1))
done
strip -o "$W/libbaler.stripped.so" target/release/libbaler.so
python3 - "$W/rates.tsv" "$W/t.bale" target/release/libbaler.so "$W/libbaler.stripped.so" \
    target/release/libbaler.a "$W"/wheels/baler-*.whl <<'PY'
import os, statistics, sys
rates = {}
for line in open(sys.argv[1]):
    f = line.split("\t")
    rates.setdefault(f[0], []).append(float(f[1]))
m = {k: statistics.median(v) for k, v in rates.items()}
print(f"table: {sys.argv[2]}, {os.path.getsize(sys.argv[2])} bytes")
for k in ("rust", "c", "python"):
    print(f"{k:<7} {m[k]:8.1f} ns/lookup  (medians of {len(rates[k])} runs: "
          f"{', '.join(f'{x:.1f}' for x in rates[k])})")
print(f"C / Rust per lookup (goal <= 1.2): {m['c'] / m['rust']:.3f}")
print(f"Python / Rust per lookup:          {m['python'] / m['rust']:.2f}")
for label, path in zip(["libbaler.so (as built, debug info)", "libbaler.so (stripped)",
                        "libbaler.a", "wheel"], sys.argv[3:]):
    print(f"{label:<36} {os.path.getsize(path):>10} bytes  {os.path.basename(path)}")
PY
