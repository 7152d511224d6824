#!/usr/bin/python3
"""Clopper-Pearson limits of the core against an independent high-precision reference.

Source: mpmath (Debian's python3-mpmath, 40 significant digits). The binomial
tail is computed from the incomplete-beta identity
    P(Bin(n, p) <= k) = n C(n-1, k) Int_p^1 u^k (1-u)^(n-1-k) du
    P(Bin(n, p) >= k) = n C(n-1, k-1) Int_0^p u^(k-1) (1-u)^(n-k) du
(Johnson, Kemp & Kotz 2005, Univariate Discrete Distributions, eq. 3.14)
with mpmath's loggamma and Gauss-Legendre quadrature, and cross-checked
against mpmath.betainc where that converges (n up to 10^9 here).

For each (n, k, delta) of a grid from n = 10 to 2^53 and delta from 0.5 down
to the smallest positive double, core_probe prints the core's limits; the test
asserts
  * safe side, every case: P(Bin(n, upper) <= k) <= delta and
    P(Bin(n, lower) >= k) <= delta (Clopper & Pearson 1934: the limits are
    the p at which these tails equal delta, and the tails are monotone in p);
  * exactness, every case reported exact: moving the limit inward by a
    relative 1e-10 (or to the neighbouring double at 1 and 0) makes the tail
    exceed delta, so the limit is within 1e-10 of the exact one;
  * sample compression (Langford 2005): the same at the union-bound level
    ln delta - ln C(m, d) - ln m, computed here in mpmath.
Usage: tail_limits_test.py --probe build/tests/core/core_probe [--verbose]
"""
import argparse
import math
import multiprocessing
import subprocess
import sys

import mpmath as mp

mp.mp.dps = 40
TIGHT = 1e-10
SMALLEST = 4.9406564584124654e-324  # the smallest positive double (subnormal)
BELOW_ONE = 1.0 - 2.0 ** -53


def log_tail(n, k, p, upper):
    """ln P(Bin(n, p) <= k) (upper False) or ln P(Bin(n, p) >= k) (upper True)."""
    p = mp.mpf(p)
    if upper:
        if k == 0 or p >= 1:
            return mp.mpf(0)
        if p <= 0:
            return mp.mpf("-inf")
        j, lo, hi = k - 1, mp.mpf(0), p
    else:
        if k >= n or p <= 0:
            return mp.mpf(0)
        if p >= 1:
            return mp.mpf("-inf")
        j, lo, hi = k, p, mp.mpf(1)
    m = n - 1
    jm, mm = mp.mpf(j), mp.mpf(m)

    def f(u):  # ln u^j (1-u)^(m-j)
        if u <= 0:
            return mp.mpf(0) if j == 0 else mp.mpf("-inf")
        if u >= 1:
            return mp.mpf(0) if j == m else mp.mpf("-inf")
        return jm * mp.log(u) + (mm - jm) * mp.log1p(-u)

    q = jm / mm
    c = min(max(q, lo), hi)  # the integrand's largest value on [lo, hi]
    fc = f(c)
    drop = 130  # e^-130: far below 40 digits of the integral

    def edge(a, b):  # from the peak side a toward b: where f falls `drop` below fc
        if f(b) >= fc - drop:
            return b
        for _ in range(400):
            mid = (a + b) / 2
            if f(mid) >= fc - drop:
                a = mid
            else:
                b = mid
            if abs(b - a) <= mp.mpf(10) ** -35 * abs(b):
                break
        return b

    left = edge(c, lo) if lo < c else c
    right = edge(c, hi) if c < hi else c
    pieces = 24
    pts = []
    if left < c:
        pts += [left + (c - left) * i / pieces for i in range(pieces)]
    if right > c:
        pts += [c + (right - c) * i / pieces for i in range(pieces + 1)]
    else:
        pts += [c]
    if len(pts) < 2:
        return mp.mpf("-inf")
    integral = mp.quad(lambda u: mp.exp(f(u) - fc), pts, method="gauss-legendre")
    log_const = mp.log(n) + mp.loggamma(mm + 1) - mp.loggamma(jm + 1) - mp.loggamma(mm - jm + 1)
    return log_const + fc + mp.log(integral)


def grid():
    ns = [10, 37, 100, 1000, 10**4, 123457, 10**6, 10**7, 370000000, 10**9, 2**32 + 7,
          10**11, 3 * 10**11 + 1, 10**12, 10**13, 10**14, 10**15, 2**53]
    deltas = [0.5, 0.05, 1e-9, 1e-300, SMALLEST]
    cases = []
    for n in ns:
        ks = sorted({0, 1, 37, n // 100, n // 3, n // 2, n - 1, n})
        ks = [k for k in ks if 0 <= k <= n]
        for k in ks:
            for d in deltas:
                cases.append((n, k, d))
    # The audited case: Boost's inversion put the upper limit 6.4e-13
    # (relative) below the exact one.
    cases.append((370000000, 37, 0.3))
    return cases


def compression_grid():
    cases = []
    for m, d in [(100, 5), (1000, 40), (10**5, 100), (10**7, 10**4), (10**9, 10**3),
                 (10**12, 10**6), (2**53, 2**20)]:
        outside = m - d
        for k in sorted({0, 1, outside // 1000, outside // 100, outside // 3, outside // 2}):
            for delta in [0.05, 1e-300]:
                for fixed in (0, 1):
                    cases.append((m, d, k, delta, fixed))
    return cases


def check_limit(args):
    """Returns (case, problems, exact) for one upper or lower limit."""
    kind, n, k, log_level, value, exact = args
    problems = []
    upper = kind == "upper"
    if upper and value >= 1.0 and k >= n:
        return args, problems
    if not upper and k == 0:
        if value != 0.0:
            problems.append("lower limit at k = 0 must be 0")
        return args, problems
    tail_at = log_tail(n, k, value, upper=not upper)
    if tail_at > log_level:
        problems.append(f"UNSAFE: tail at the limit exp({mp.nstr(tail_at, 12)}) > level "
                        f"exp({mp.nstr(log_level, 12)})")
    if exact and not problems:
        if upper:
            inner = BELOW_ONE if value >= 1.0 else value * (1.0 - TIGHT)
        else:
            inner = 2.2250738585072014e-308 if value <= 0.0 else min(value * (1.0 + TIGHT), 1.0)
        if log_tail(n, k, inner, upper=not upper) <= log_level:
            problems.append(f"not exact: the limit moved inward by {TIGHT:g} relative still holds")
    return args, problems


def run_probe(probe, lines):
    out = subprocess.run([probe], input="\n".join(lines) + "\n", capture_output=True, text=True,
                         check=True).stdout.splitlines()
    if len(out) != len(lines):
        sys.exit(f"core_probe answered {len(out)} lines for {len(lines)} questions")
    return [line.split() for line in out]


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--probe", required=True)
    parser.add_argument("--verbose", action="store_true")
    args = parser.parse_args()

    # The reference itself: the quadrature agrees with mpmath.betainc (a
    # hypergeometric series) where the latter converges.
    for n, k, p in [(370000000, 37, 1.1e-7), (1000, 300, 0.28), (1000, 300, 0.35), (10, 3, 0.01)]:
        a = log_tail(n, k, p, upper=False)
        b = mp.log(mp.betainc(n - k, k + 1, 0, 1 - mp.mpf(p), regularized=True))
        assert abs(a - b) < mp.mpf(10) ** -25, (n, k, p, a, b)
        a = log_tail(n, k, p, upper=True)
        b = mp.log(mp.betainc(k, n - k + 1, 0, mp.mpf(p), regularized=True))
        assert abs(a - b) < mp.mpf(10) ** -25, (n, k, p, a, b)

    cases = grid()
    lines = []
    for n, k, d in cases:
        lines.append(f"upper {n} {k} {d!r}")
        lines.append(f"lower {n} {k} {d!r}")
    comp = compression_grid()
    for m, d, k, delta, fixed in comp:
        lines.append(f"compression {m} {d} {k} {delta!r} {fixed}")
    answers = run_probe(args.probe, lines)

    work = []
    worst_cpu = (0.0, "")
    inexact = []
    for i, (n, k, d) in enumerate(cases):
        for j, kind in enumerate(("upper", "lower")):
            value, exact, cpu = answers[2 * i + j]
            if float(cpu) > worst_cpu[0]:
                worst_cpu = (float(cpu), lines[2 * i + j])
            if exact != "1":
                inexact.append(lines[2 * i + j])
            work.append((kind, n, k, mp.log(mp.mpf(d)), float(value), exact == "1"))
    base = 2 * len(cases)
    for i, (m, d, k, delta, fixed) in enumerate(comp):
        value, exact, cpu = answers[base + i]
        if float(cpu) > worst_cpu[0]:
            worst_cpu = (float(cpu), lines[base + i])
        if exact != "1":
            inexact.append(lines[base + i])
        level = (mp.log(mp.mpf(delta)) - (mp.loggamma(m + 1) - mp.loggamma(d + 1)
                                           - mp.loggamma(m - d + 1)))
        if not fixed:
            level -= mp.log(m)
        if d >= m:
            continue
        work.append(("upper", m - d, k, level, float(value), exact == "1"))

    with multiprocessing.Pool(2) as pool:
        results = pool.map(check_limit, work, chunksize=8)
    failures = [(a, p) for a, p in results if p]
    for a, p in failures:
        print("FAIL", a[:3], mp.nstr(a[3], 17), repr(a[4]), "exact" if a[5] else "inexact", p)
    unsafe = sum(1 for _, p in failures if any(x.startswith("UNSAFE") for x in p))
    print(f"{len(work)} limits ({len(cases)} (n, k, delta) cases and {len(comp)} compression "
          f"cases) against mpmath: {unsafe} on the unsafe side, {len(failures)} failures, "
          f"{len(inexact)} reported inexact")
    for line in inexact:
        print("  inexact:", line)
    print(f"slowest call: {worst_cpu[0] / 1000:.2f} ms CPU ({worst_cpu[1]})")
    return 1 if failures else 0


if __name__ == "__main__":
    sys.exit(main())
