#!/usr/bin/env bash
# Throughput of `baler synth` at a given size, side by side with copying the same bytes
# (the I/O floor) and with writing them zstd-compressed. Medians of RUNS runs; wall-clock and
# CPU (user+system) rates, since the machine may be shared.
#
#   benches/gen_synth.sh [PAIRS] [RUNS]      (default 1000000 3)
set -euo pipefail
PAIRS=${1:-1000000}
RUNS=${2:-3}
cd "$(dirname "$0")/.."
cargo build --release --quiet
BALER=target/release/baler
DIR=$(mktemp -d)
trap 'rm -rf "$DIR"' EXIT

# Prints "wall cpu" seconds for one run of the command.
measure() {
  /usr/bin/time -f "%e %U %S" -o "$DIR/time" "$@" >/dev/null 2>&1
  awk '{print $1, $2 + $3}' "$DIR/time"
}
median() { sort -n | awk '{a[NR]=$1} END {print a[int((NR+1)/2)]}'; }

declare -A WALL CPU
run() {
  local name=$1; shift
  : > "$DIR/$name.w"; : > "$DIR/$name.c"
  for _ in $(seq "$RUNS"); do
    read -r w c < <(measure "$@")
    echo "$w" >> "$DIR/$name.w"; echo "$c" >> "$DIR/$name.c"
  done
  WALL[$name]=$(median < "$DIR/$name.w")
  CPU[$name]=$(median < "$DIR/$name.c")
}

run synth "$BALER" synth --pairs "$PAIRS" -o "$DIR/table.tsv"
run synth_counts "$BALER" synth --pairs "$PAIRS" --counts --alignment -o "$DIR/full.tsv"
run synth_zst "$BALER" synth --pairs "$PAIRS" -o "$DIR/table.tsv.zst"
run copy cp "$DIR/table.tsv" "$DIR/copy.tsv"
BYTES=$(stat -c %s "$DIR/table.tsv")

printf '%-34s %10s %10s %14s %14s %10s\n' run wall_s cpu_s pairs/s_wall pairs/s_cpu vs_copy
for name in synth synth_counts synth_zst copy; do
  awk -v n="$name" -v w="${WALL[$name]}" -v c="${CPU[$name]}" -v p="$PAIRS" -v cw="${WALL[copy]}" \
    'BEGIN { printf "%-34s %10.2f %10.2f %14.0f %14.0f %10.1f\n", n, w, c, p / (w > 0 ? w : 1e-9), p / (c > 0 ? c : 1e-9), w / (cw > 0 ? cw : 1e-9) }'
done
echo "table: $PAIRS pairs, $BYTES bytes ($(awk -v b="$BYTES" -v p="$PAIRS" 'BEGIN{printf "%.1f", b/p}') bytes/pair)"
