#!/usr/bin/env python3
"""Generates tests/data/fisher_reference.tsv: -ln p of the one-sided (upper tail) Fisher exact
test for (cooc, df_source, df_target, N), from two independent sources:

  * scipy.stats.hypergeom.logsf(cooc - 1, N, df_source, df_target)  (column scipy_neg_ln_p;
    "nan" where scipy returns -inf or nan, i.e. where its tail underflows),
  * an mpmath sum of the hypergeometric tail at 60 significant digits (column mpmath_neg_ln_p),
    the log-binomials from mpmath.loggamma, summing terms from cooc upward until they no
    longer change the sum.

The Rust test (tests/prune.rs) compares against scipy to 1e-9 relative where scipy has a value
and against mpmath everywhere. Cases with min(df_source, df_target) <= 2000 are also summed in
exact integer arithmetic (math.comb) and must agree with the mpmath column to 1e-30, which checks
the mpmath sum itself. Run:
    python3 -m venv /tmp/scipy-venv && /tmp/scipy-venv/bin/pip install scipy mpmath
    /tmp/scipy-venv/bin/python tests/data/fisher_reference.py > tests/data/fisher_reference.tsv
"""
import math
import sys

import mpmath
import numpy
import scipy
from scipy.stats import hypergeom

mpmath.mp.dps = 60

CASES = [
    # tiny tables
    (1, 1, 1, 2), (1, 1, 1, 3), (1, 1, 1, 10), (1, 1, 2, 10), (1, 2, 1, 10), (2, 2, 2, 10),
    (1, 2, 3, 10), (2, 3, 4, 10), (3, 5, 4, 20), (2, 5, 5, 10), (4, 6, 7, 12), (1, 5, 5, 10),
    (5, 5, 5, 10), (3, 3, 9, 10), (10, 10, 10, 20),
    # the 1-1-1 case across corpus sizes
    (1, 1, 1, 1000), (1, 1, 1, 68000), (1, 1, 1, 10**6), (1, 1, 1, 10**7), (1, 1, 1, 10**8),
    (1, 1, 1, 10**9),
    # small counts in a mid-sized corpus
    (1, 1, 2, 68000), (1, 2, 2, 68000), (2, 2, 2, 68000), (2, 3, 2, 68000), (1, 3, 7, 68000),
    (3, 4, 5, 68000), (5, 20, 30, 1000), (10, 100, 200, 10000), (50, 60, 70, 100000),
    (7, 900, 1200, 68000), (20, 900, 1200, 68000), (1, 40, 60, 68000), (30, 31, 30, 68000),
    # near or below the mode: p close to 1
    (1, 1000, 1000, 10**6), (2, 1000, 1000, 10**6), (1, 500, 800, 10**6), (40, 2000, 20000, 10**6),
    # deep tails where p underflows a double
    (300, 300, 300, 10**6), (1000, 1000, 1000, 10**6), (800, 1000, 900, 10**6),
    (5000, 6000, 7000, 10**7), (20000, 20000, 20000, 10**8),
    # large corpora
    (1, 1, 2, 10**7), (2, 2, 2, 10**7), (3, 10, 5, 10**7), (100, 1000, 200, 10**7),
    (4, 30, 50, 10**7), (1, 1, 5, 10**8), (2, 2, 3, 10**8), (3, 7, 4, 10**8),
    (500, 100000, 2000, 10**8), (1200, 50000, 40000, 10**8), (60, 100000, 60000, 10**8),
    (10, 10, 12, 10**8), (25, 40000, 300, 10**8), (2, 3000, 5000, 10**8),
    # beyond the range: N = 10^9
    (1, 1, 3, 10**9), (3, 5, 4, 10**9), (100, 200, 150, 10**9), (9, 100000, 80000, 10**9),
    (50000, 100000, 80000, 10**9), (2, 2, 2, 10**9),
]


def mp_log_pmf(x, n_source, n_target, total):
    lc = mpmath.loggamma
    return (lc(n_source + 1) - lc(x + 1) - lc(n_source - x + 1)
            + lc(total - n_source + 1) - lc(n_target - x + 1) - lc(total - n_source - n_target + x + 1)
            - lc(total + 1) + lc(n_target + 1) + lc(total - n_target + 1))


def mp_neg_ln_p(cooc, n_source, n_target, total):
    lo = max(0, n_source + n_target - total)
    hi = min(n_source, n_target)
    if cooc <= lo:
        return mpmath.mpf(0)
    # log of the first term, then the tail relative to it by exact ratios
    first = mp_log_pmf(cooc, n_source, n_target, total)
    s = mpmath.mpf(1)
    term = mpmath.mpf(1)
    x = cooc
    while x < hi:
        term *= mpmath.mpf((n_source - x) * (n_target - x)) / ((x + 1) * (total - n_source - n_target + x + 1))
        s += term
        x += 1
        if term < s * mpmath.mpf(10) ** -40:
            break
    return -(first + mpmath.log(s))


def exact_neg_ln_p(cooc, n_source, n_target, total):
    """The same tail in exact integer arithmetic (math.comb), for a self-check of the sum."""
    hi = min(n_source, n_target)
    num = sum(math.comb(n_source, x) * math.comb(total - n_source, n_target - x)
              for x in range(cooc, hi + 1))
    return mpmath.log(math.comb(total, n_target)) - mpmath.log(num)


def main():
    out = sys.stdout
    out.write("# -ln p, one-sided (upper tail) Fisher exact test, p = P(X >= cooc), X hypergeometric\n")
    out.write(f"# scipy {scipy.__version__} (numpy {numpy.__version__}): "
              "scipy.stats.hypergeom.logsf(cooc - 1, N, df_source, df_target), negated\n")
    out.write(f"# mpmath {mpmath.__version__}: tail sum at mp.dps=60 (see fisher_reference.py)\n")
    out.write(f"# python {sys.version.split()[0]}; nan = scipy gave no finite value\n")
    out.write("cooc\tdf_source\tdf_target\tN\tscipy_neg_ln_p\tmpmath_neg_ln_p\n")
    checked = []
    for cooc, ds, dt, n in CASES:
        with numpy.errstate(all="ignore"):
            v = -float(hypergeom.logsf(cooc - 1, n, ds, dt))
        scipy_text = repr(v) if math.isfinite(v) else "nan"
        mp_value = mp_neg_ln_p(cooc, ds, dt, n)
        if min(ds, dt) <= 2000 and cooc > max(0, ds + dt - n):
            exact = exact_neg_ln_p(cooc, ds, dt, n)
            assert abs(exact - mp_value) <= mpmath.mpf(10) ** -30 * max(1, abs(exact)), (cooc, ds, dt, n)
            checked.append(1)
        out.write(f"{cooc}\t{ds}\t{dt}\t{n}\t{scipy_text}\t{mpmath.nstr(mp_value, 25)}\n")


    print(f"{len(checked)} cases also checked in exact integer arithmetic", file=sys.stderr)


if __name__ == "__main__":
    main()
