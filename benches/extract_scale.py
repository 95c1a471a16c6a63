#!/usr/bin/env python3
"""Scale benchmark for `baler extract` on synthetic aligned corpora.

Generates corpora of the given sizes (sentence pairs of ~25 tokens, Zipfian vocabulary,
plausible alignments; see src/extract/synthetic.rs), runs the whole one-machine job on each
with /usr/bin/time -v, and prints side by side: wall and CPU time, sentence pairs/s, distinct
pairs, peak resident memory, the time of each step, and the growth of time against the growth
of the corpus (1.00 = linear). With --baseline it also runs the smallest size on one thread
and prints the speed-up of two threads over one.

Usage: benches/extract_scale.py [--dir DIR] [--memory 4G] [--baseline] [SIZE ...]
       (default sizes: 100000 300000; the issue's goal is 1000000 in under 5 minutes)
"""

import argparse
import os
import re
import subprocess
import sys

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
BALER = os.path.join(ROOT, "target", "release", "baler")


def corpus(directory, n):
    stem = os.path.join(directory, f"synthetic-{n}")
    if not os.path.exists(stem + ".align"):
        subprocess.run(
            ["cargo", "bench", "-q", "--bench", "extract", "--", "--write-corpus", directory, str(n)],
            cwd=ROOT,
            check=True,
        )
    return stem


def run(stem, threads, memory, out):
    cmd = [
        "/usr/bin/time", "-v", BALER, "extract",
        "--source", stem + ".src", "--target", stem + ".tgt", "--alignment", stem + ".align",
        "-o", out, "--threads", str(threads), "--memory", memory,
    ]
    p = subprocess.run(cmd, capture_output=True, text=True)
    if p.returncode != 0:
        sys.exit(p.stderr)
    err = p.stderr

    def grab(pattern, cast=float):
        m = re.search(pattern, err)
        return cast(m.group(1)) if m else None

    wall = grab(r"Elapsed \(wall clock\) time \(h:mm:ss or m:ss\): (\S+)", str)
    parts = [float(x) for x in wall.split(":")]
    seconds = sum(v * 60 ** (len(parts) - 1 - i) for i, v in enumerate(parts))
    steps = re.search(r"extract ([\d.]+), merge ([\d.]+), count ([\d.]+), attach ([\d.]+)", err)
    return {
        "wall": seconds,
        "cpu": grab(r"User time \(seconds\): ([\d.]+)") + grab(r"System time \(seconds\): ([\d.]+)"),
        "rss_mib": grab(r"Maximum resident set size \(kbytes\): (\d+)") / 1024,
        "pairs": grab(r"(\d+) distinct pairs", int),
        "occurrences": grab(r"(\d+) phrase-pair occurrences", int),
        "sentences": grab(r"(\d+) sentence pairs kept", int),
        "steps": [float(x) for x in steps.groups()] if steps else None,
        "bytes": os.path.getsize(out),
    }


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("sizes", nargs="*", type=int, default=[100000, 300000])
    ap.add_argument("--dir", default=os.environ.get("BALER_BENCH_DIR", "/tmp/baler-extract-bench"))
    ap.add_argument("--memory", default="4G")
    ap.add_argument("--baseline", action="store_true")
    args = ap.parse_args()
    os.makedirs(args.dir, exist_ok=True)
    subprocess.run(["cargo", "build", "--release", "-q"], cwd=ROOT, check=True)
    rows = []
    for n in args.sizes:
        stem = corpus(args.dir, n)
        out = os.path.join(args.dir, f"table-{n}.tsv.zst")
        rows.append((n, run(stem, 2, args.memory, out)))
        os.remove(out)
    print(f"{'sentence pairs':>14} {'wall s':>8} {'cpu s':>8} {'pairs/s':>9} {'distinct':>11} "
          f"{'peak MiB':>9} {'steps: extract/merge/count/attach s':>36} {'growth':>7}")
    n0, r0 = rows[0]
    for n, r in rows:
        growth = (r["wall"] / r0["wall"]) / (n / n0)
        steps = "/".join(f"{s:.1f}" for s in r["steps"]) if r["steps"] else "?"
        print(f"{n:>14} {r['wall']:>8.1f} {r['cpu']:>8.1f} {r['sentences'] / r['wall']:>9.0f} "
              f"{r['pairs']:>11} {r['rss_mib']:>9.0f} {steps:>36} {growth:>7.2f}")
    if args.baseline:
        stem = corpus(args.dir, n0)
        out = os.path.join(args.dir, "table-baseline.tsv.zst")
        one = run(stem, 1, args.memory, out)
        os.remove(out)
        print(f"one thread on {n0}: {one['wall']:.1f} s wall; two threads are "
              f"{one['wall'] / r0['wall']:.2f}x faster")
    goal = 1_000_000
    n, r = rows[-1]
    print(f"projected for {goal} sentence pairs at the largest size's rate: "
          f"{r['wall'] * goal / n:.0f} s (goal: 300 s within 4 GiB)")


if __name__ == "__main__":
    main()
