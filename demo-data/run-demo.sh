#!/bin/sh
# The main job on the shipped demo data: word-aligned English-Spanish text in, a pruned, packed,
# verified phrase table out with a report of what pruning cost (baler build on the recipe), then
# a few lookups and a sweep over significance thresholds. Builds baler first. Outputs: demo-out/.
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

echo "== language model of the Spanish side (4-gram, modified Kneser-Ney), for the decoder"
$baler lm build demo-data/toolshed.es -o "$out/toolshed.es.balm" --quiet
echo "== build: extract, prune (significance, then top 20), pack, report on the held-out set"
# the stages and their options are in the recipe; see demo-data/toolshed.recipe.toml
$baler build demo-data/toolshed.recipe.toml --quiet
echo "== inspect --verify"
$baler inspect --verify "$out/toolshed.bale"
echo "== lookup"
$baler lookup "$out/toolshed.bale" "the cordless drill" "please" "the workshop" "a spaceship" || true
echo "== sweep: translation quality (BLEU, chrF) against size, significance thresholds × top-k"
$baler sweep "$out/toolshed.tsv" --test demo-data/toolshed.test.en \
    --reference demo-data/toolshed.test.es --lm "$out/toolshed.es.balm" \
    --vary top-k=3,20 --vary significance=0,alpha-epsilon,alpha+epsilon,10 -o "$out/sweep"
