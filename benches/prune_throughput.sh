#!/bin/sh
# Significance-filtering throughput next to its baselines, in one run (medians and ratios).
# Usage: benches/prune_throughput.sh [PAIRS [FILE_PAIRS [TRIALS]]]
#   PAIRS       pairs held in memory for the pure-filtering measurements (default 5000000)
#   FILE_PAIRS  pairs in the TSV file for the end-to-end runs (default 2000000; a tenth of it
#               is also run, to compare peak memory)
set -eu
cd "$(dirname "$0")/.."
exec cargo bench --bench prune_throughput -- \
    --pairs "${1:-5000000}" --file-pairs "${2:-2000000}" --trials "${3:-5}"
