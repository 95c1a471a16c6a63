#!/bin/sh
# The measure benches next to their baselines, in one run: criterion's medians and ratios.
# Usage: benches/measure.sh [PAIRS]   (synthetic pairs for prune -> pack; default 200000)
set -eu
cd "$(dirname "$0")/.."
BALER_BENCH_PAIRS="${1:-200000}" cargo bench --bench measure -- --noplot >/dev/null
python3 - <<'PY'
import json, os
def median(group, name):
    path = os.path.join("target", "criterion", group, name, "new", "estimates.json")
    with open(path) as f:
        return json.load(f)["median"]["point_estimate"] / 1e6  # ms
for group, new, old in [("measure_prune_pack", "channel", "temp_file"),
                        ("measure_coverage", "packed", "tsv_in_memory")]:
    a, b = median(group, new), median(group, old)
    print(f"{group}: {new} {a:.2f} ms, {old} {b:.2f} ms, {new}/{old} = {a / b:.2f}")
PY
