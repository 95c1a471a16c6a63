#!/usr/bin/env python3
"""Side-by-side measurements of a packed table against baselines, in one run.

Generates a synthetic table (`baler synth`), packs it (4 scores at 8 bits, no counts or
alignment), dumps it back, and prints, each beside its goal:

* bytes per pair, split into key index, targets and scores (scores measured as the size
  difference to a pack of the same pairs without score columns);
* packed size against `gzip -9` and `zstd -19 --long=27` of the dumped TSV;
* pack throughput per core (pairs per CPU-second of the pack process);
* open time, lookups/s against a HashMap of the same table, RssAnon after 10^6 lookups
  (from `cargo bench --bench probe`).

Usage: python3 benches/compare.py [--pairs 10000000] [--dir bench-out] [--zstd-threads 1]
Standard library only. Needs gzip and zstd on PATH.
"""

import argparse
import json
import os
import resource
import shutil
import subprocess
import sys
import time

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
BALER = os.path.join(ROOT, "target", "release", "baler")


def run(args, **kw):
    return subprocess.run(args, check=True, **kw)


def timed(args, **kw):
    """Runs a child; returns (wall seconds, CPU seconds of that child)."""
    before = resource.getrusage(resource.RUSAGE_CHILDREN)
    t = time.perf_counter()
    run(args, **kw)
    wall = time.perf_counter() - t
    after = resource.getrusage(resource.RUSAGE_CHILDREN)
    cpu = (after.ru_utime - before.ru_utime) + (after.ru_stime - before.ru_stime)
    return wall, cpu


def compressed_size(cmd, path):
    with open(path, "rb") as src:
        p = subprocess.Popen(cmd, stdin=src, stdout=subprocess.PIPE)
        n = 0
        while True:
            chunk = p.stdout.read(1 << 20)
            if not chunk:
                break
            n += len(chunk)
        if p.wait() != 0:
            sys.exit(f"{cmd[0]} failed")
    return n


def sections(table):
    out = subprocess.run([BALER, "inspect", table], check=True, capture_output=True, text=True).stdout
    sizes = {}
    in_table = False
    for line in out.splitlines():
        if line.startswith("section"):
            in_table = True
            continue
        if in_table:
            if not line.strip():
                break
            parts = line.split()
            sizes[parts[0]] = int(parts[2])
    return sizes


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--pairs", default="10000000")
    ap.add_argument("--dir", default=os.path.join(ROOT, "bench-out"))
    ap.add_argument("--zstd-threads", default="1", help="threads for the zstd baseline (1 = exact single-thread ratio)")
    ap.add_argument("--lookups", default="1000000")
    ap.add_argument("--keep", action="store_true", help="keep the generated files")
    args = ap.parse_args()
    for tool in ("gzip", "zstd"):
        if shutil.which(tool) is None:
            sys.exit(f"{tool} is needed on PATH")
    os.makedirs(args.dir, exist_ok=True)
    run(["cargo", "build", "--release", "--quiet"], cwd=ROOT)
    tsv = os.path.join(args.dir, "synth.tsv")
    bale = os.path.join(args.dir, "synth.bale")
    bare_tsv = os.path.join(args.dir, "synth-no-scores.tsv")
    bare = os.path.join(args.dir, "synth-no-scores.bale")
    dump = os.path.join(args.dir, "dump.tsv")

    print(f"generating {args.pairs} pairs ...", file=sys.stderr)
    run([BALER, "synth", "--pairs", args.pairs, "-o", tsv])
    print("packing ...", file=sys.stderr)
    pack_wall, pack_cpu = timed([BALER, "pack", tsv, "-o", bale, "--bits", "8", "-q"])
    run([BALER, "dump", bale, "-o", dump])
    with open(tsv) as src, open(bare_tsv, "w") as dst:
        for line in src:
            if line.startswith("#"):
                dst.write(line)
                continue
            f = line.rstrip("\n").split("\t")
            dst.write(f[0] + "\t" + f[1] + "\n")
    run([BALER, "pack", bare_tsv, "-o", bare, "-q"])

    pairs = None
    meta = subprocess.run([BALER, "inspect", bale], check=True, capture_output=True, text=True).stdout
    for line in meta.splitlines():
        if line.startswith("pairs"):
            pairs = int(line.split()[1])
    size = os.path.getsize(bale)
    s, sb = sections(bale), sections(bare)
    # format 2.0: keys live inside the blocks too; here the key index is the two index sections
    key_index = s.get("block-keys", 0) + s.get("block-index", 0)
    targets = s.get("targets", 0) + s.get("target-index", 0) + s.get("vocabulary", 0)
    scores = size - os.path.getsize(bare)
    other = size - key_index - targets - scores

    print("compressing the dumped TSV with gzip -9 and zstd -19 --long=27 ...", file=sys.stderr)
    gz = compressed_size(["gzip", "-9", "-c"], dump)
    zs = compressed_size(["zstd", "-19", "--long=27", f"-T{args.zstd_threads}", "-c", "-q"], dump)

    print("probing open time, lookups and memory ...", file=sys.stderr)
    probe = subprocess.run(
        ["cargo", "bench", "--quiet", "--bench", "probe", "--", bale, dump, args.lookups],
        cwd=ROOT, check=True, capture_output=True, text=True,
    ).stdout
    p = json.loads(probe.strip().splitlines()[-1])

    bpp = size / pairs
    rows = [
        ("pairs", f"{pairs}", "", ""),
        ("packed bytes/pair", f"{bpp:.2f}", "<= 10", "ok" if bpp <= 10 else "MISSED"),
        ("  key index (block keys + block index)", f"{key_index / pairs:.2f}", "", ""),
        ("  targets (phrases + vocabulary)", f"{targets / pairs:.2f}", "", ""),
        ("  scores (4 x 8 bits, entropy-coded)", f"{scores / pairs:.2f}", "", ""),
        ("  blocks (front-coded keys, target refs, codes), models, metadata", f"{other / pairs:.2f}", "", ""),
        ("gzip -9 of dump, bytes/pair", f"{gz / pairs:.2f}", "", ""),
        ("zstd -19 --long=27 of dump, bytes/pair", f"{zs / pairs:.2f}", "", ""),
        ("packed / gzip -9", f"{size / gz:.3f}", "<= 0.45", "ok" if size / gz <= 0.45 else "MISSED"),
        ("packed / zstd -19 --long=27", f"{size / zs:.3f}", "<= 0.80", "ok" if size / zs <= 0.8 else "MISSED"),
        ("pack pairs per CPU-second", f"{pairs / pack_cpu:.0f}", ">= 1000000", "ok" if pairs / pack_cpu >= 1e6 else "MISSED"),
        ("pack wall seconds", f"{pack_wall:.1f}", "", ""),
        ("open, median ms (max)", f"{p['open_median_ms']:.3f} ({p['open_max_ms']:.3f})", "< 1", "ok" if p["open_median_ms"] < 1 else "MISSED"),
        ("lookups/s packed", f"{p['packed_lookups_per_s']:.0f}", "", ""),
        ("lookups/s HashMap", f"{p['hashmap_lookups_per_s']:.0f}", "", ""),
        ("packed / HashMap lookups", f"{p['packed_lookups_per_s'] / p['hashmap_lookups_per_s']:.3f}", ">= 0.2",
         "ok" if p["packed_lookups_per_s"] / p["hashmap_lookups_per_s"] >= 0.2 else "MISSED"),
        ("RssAnon after lookups, MiB", f"{p['rss_anon_after_lookups_kib'] / 1024:.1f}", "< 16",
         "ok" if p["rss_anon_after_lookups_kib"] < 16 * 1024 else "MISSED"),
        ("  of which query list, MiB", f"{(p['rss_anon_with_queries_kib'] - p['rss_anon_start_kib']) / 1024:.1f}", "", ""),
        ("RssAnon with the HashMap, MiB", f"{p['rss_anon_with_hashmap_kib'] / 1024:.1f}", "", ""),
    ]
    width = max(len(r[0]) for r in rows)
    print(f"{'figure':<{width}}  {'measured':>20}  {'goal':>12}  status")
    for name, value, goal, status in rows:
        print(f"{name:<{width}}  {value:>20}  {goal:>12}  {status}")
    if not args.keep:
        for f in (tsv, bare_tsv, bare, dump):
            os.remove(f)


if __name__ == "__main__":
    main()
