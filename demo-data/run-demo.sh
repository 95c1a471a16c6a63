#!/bin/sh
# The main job on the shipped demo data: word-aligned English-Spanish text in, a pruned, packed,
# verified phrase table out, then a few lookups. Builds baler first. Outputs go to demo-out/.
set -eu
cd "$(dirname "$0")/.."
if ! command -v cargo >/dev/null 2>&1; then
    curl -sSf https://sh.rustup.rs | sh -s -- -y --profile minimal
    . "$HOME/.cargo/env"
fi
cargo build --release --locked --quiet
baler=target/release/baler
out=demo-out
mkdir -p "$out"

echo "== extract: phrase pairs consistent with the word alignment, scored and counted"
$baler extract --source demo-data/toolshed.en --target demo-data/toolshed.es \
    --alignment demo-data/toolshed.align -o "$out/toolshed.tsv" --quiet
echo "== prune: Fisher significance (alpha+epsilon), then the 20 best options per phrase"
$baler prune "$out/toolshed.tsv" -o "$out/toolshed.pruned.tsv" \
    --significance alpha+epsilon --top-k 20 --by p_t_given_s --stats "$out/prune-stats.json"
echo "== pack"
$baler pack "$out/toolshed.pruned.tsv" -o "$out/toolshed.bale"
echo "== inspect --verify"
$baler inspect --verify "$out/toolshed.bale"
echo "== lookup"
$baler lookup "$out/toolshed.bale" "the cordless drill" "please" "the workshop" "a spaceship" || true
