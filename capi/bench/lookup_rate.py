"""Lookup throughput of the Python module; see capi/bench/throughput.sh.

Usage: python lookup_rate.py TABLE QUERIES [ROUNDS]. Same work as the Rust and C programs:
every query once per round, reading every option's target and first score; median ns per
lookup."""

import statistics
import sys
import time

import baler


def main():
    path, queries_path = sys.argv[1], sys.argv[2]
    rounds = int(sys.argv[3]) if len(sys.argv) > 3 else 7
    table = baler.Table(path)
    first = table.score_names[0]
    with open(queries_path, encoding="utf-8") as fh:
        queries = [line.rstrip("\n") for line in fh if line.strip()]

    def one_pass():
        n_bytes, total = 0, 0.0
        for q in queries:
            for o in table.lookup(q):
                n_bytes += len(o.target.encode("utf-8"))
                total += o.scores[first]
        return n_bytes, total

    check = one_pass()
    times = []
    for _ in range(rounds):
        t0 = time.perf_counter_ns()
        again = one_pass()
        times.append((time.perf_counter_ns() - t0) / len(queries))
        assert again[0] == check[0]
    print(f"python\t{statistics.median(times):.1f}\tns/lookup\t{len(queries)} queries\t"
          f"target bytes {check[0]}\tscore sum {check[1]:.3f}")


if __name__ == "__main__":
    main()
