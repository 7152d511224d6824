"""Per-slice reference values from scipy: one-sided Clopper-Pearson limits at
the slices' shares, for Certify and for the promotion gate, and the error
counts where a slice's gate outcome flips.

Limits also at 40 digits with mpmath (root of the regularized incomplete
beta, mpmath.betainc), rounded outward to a double: columns upper_outward
and lower_outward, the reference of the outward-rounding checks.

Shares: Bonferroni (1936), delta_slices / G, or delta_slices * w_s with
caller weights (rule "bonferroni-weighted", column weight); Sidak (1967),
1 - (1 - delta_slices)^(1/G), computed in numpy as -expm1(log1p(-d) / G) and
cross-checked at 50 digits with mpmath. Limits: scipy.stats.beta.isf /
beta.ppf (the complement inverse; Clopper & Pearson 1934), cross-checked by
brentq on scipy.stats.binom.cdf / binom.sf (fixtures_gate.py). Gate
boundaries: linear scans over the error count (brute force).

Where delta_slices comes from:
  * Certify, slices only: the request's failure_probability;
  * Certify, slices and other evidence: half of it;
  * gate without a champion: delta / 2 (equal parts risk, slices); with a
    champion: delta / 3 (risk, comparison, slices). Each slice then spends
    its share half on the upper and half on the lower limit.
"""
import math
import os
import sys

import mpmath
import numpy

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
from fixtures_gate import checked_lower, checked_upper, verdict_boundaries  # noqa: E402

# (name, error_count, sample_count): slices of different sizes, with zero
# errors, all errors and ordinary rates.
SLICES = [("north", 12, 900), ("south", 40, 500), ("coast", 3, 300), ("inland", 0, 1200),
          ("islands", 7, 7), ("metro", 250, 20000)]


def bonferroni_share(total, g):
    return total / g


def sidak_share(total, g):
    """1 - (1 - total)^(1/g) in numpy, checked at 50 digits with mpmath."""
    value = float(-numpy.expm1(numpy.log1p(-total) / g))
    with mpmath.workdps(50):
        exact = 1 - mpmath.power(1 - mpmath.mpf(total), mpmath.mpf(1) / g)
        assert abs(mpmath.mpf(value) - exact) <= mpmath.mpf(1e-14) * exact, (total, g, value)
    return value


SHARE_RULES = [("bonferroni", bonferroni_share), ("sidak", sidak_share)]

# Caller weights of the weighted union bound (Bonferroni 1936: slice s gets
# delta_slices * w_s, sum_s w_s <= 1), for the first 3 or 6 slices: powers of
# two, so that every product with delta_slices is exact in binary and the
# shares need no rounding (the second sums to 15/16, leaving some unspent).
WEIGHTS = {3: [0.5, 0.25, 0.25], 6: [0.25, 0.25, 0.125, 0.125, 0.125, 0.0625]}


def weighted_shares(total, g):
    """(rule, share, weight) per slice: the rule column is
    "bonferroni-weighted", the weight column the slice's weight."""
    assert sum(WEIGHTS[g]) <= 1
    return [("bonferroni-weighted", total * w, w) for w in WEIGHTS[g]]


def rule_shares(total, g):
    """Every share rule's (rule, share, weight) per slice: equal Bonferroni
    and Sidak shares (weight column empty), then the weighted shares."""
    out = [[(rule, share_of(total, g), "")] * g for rule, share_of in SHARE_RULES]
    return out + [weighted_shares(total, g)]


def mp_root(f, guess):
    """The root of the increasing f near guess, at 40 digits (mpmath's
    Anderson iteration from a bracket around scipy's value, else bisection
    over [0, 1])."""
    try:
        root = mpmath.findroot(f, (guess * (1 - 1e-6), guess * (1 + 1e-6)), solver="anderson")
        if 0 < root < 1:
            return root
    except (ValueError, ZeroDivisionError):
        pass
    lo, hi = mpmath.mpf(0), mpmath.mpf(1)
    for _ in range(140):
        mid = (lo + hi) / 2
        lo, hi = (mid, hi) if f(mid) < 0 else (lo, mid)
    return (lo + hi) / 2


def outward(x, up):
    """The double next to the 40-digit x on the outer side: the smallest
    double >= x (up) or the largest <= x."""
    d = float(x)
    if up and mpmath.mpf(d) < x:
        d = math.nextafter(d, math.inf)
    if not up and mpmath.mpf(d) > x:
        d = math.nextafter(d, -math.inf)
    return d


def mp_limits(n, k, level, upper, lower):
    """Clopper-Pearson limits at 40 digits (regularized incomplete beta,
    mpmath.betainc; Clopper & Pearson 1934), each rounded outward to a
    double, after checking scipy's agree within 1e-12 relative: the
    reference of the outward-rounding check (scipy's own values can be a
    unit or two in the last place on the inner side)."""
    with mpmath.workdps(40):
        return _mp_limits(n, k, level, upper, lower)


def _mp_limits(n, k, level, upper, lower):
    d = mpmath.mpf(level)
    if k >= n:
        u = mpmath.mpf(1)
    else:
        u = mp_root(lambda x: mpmath.betainc(k + 1, n - k, 0, x, regularized=True) - (1 - d),
                    upper)
    if k == 0:
        lo = mpmath.mpf(0)
    else:
        lo = mp_root(lambda x: mpmath.betainc(k, n - k + 1, 0, x, regularized=True) - d, lower)
    assert abs(u - upper) <= 1e-12 * u, (n, k, level, upper, u)
    assert abs(lo - lower) <= 1e-12 * lo, (n, k, level, lower, lo)
    return outward(u, True), outward(lo, False)


def slice_certify():
    """Certify: each slice's upper and lower limit at its whole share (the
    certificate's failure_probability is its share; its interval's two
    sides are each one-sided at that share, as the hold-out exact binomial
    family states)."""
    header = ["case", "rule", "failure_probability", "slice_count", "slice", "error_count",
              "sample_count", "share", "upper", "lower", "upper_outward", "lower_outward",
              "weight"]
    rows = []
    for case, part in [("slices-only", 1.0), ("with-holdout", 0.5)]:
        for delta in [0.05, 0.01, 1e-6]:
            for g in [3, 6]:
                slices = SLICES[:g]
                total = delta * part  # halving is exact in binary
                for per_slice in rule_shares(total, g):
                    for (name, k, n), (rule, share, weight) in zip(slices, per_slice):
                        u, lo = checked_upper(n, k, share), checked_lower(n, k, share)
                        rows.append([case, rule, delta, g, name, k, n, share, u, lo,
                                     *mp_limits(n, k, share, u, lo), weight])
    return header, rows


def gate_part(delta, champion):
    return delta / 3 if champion else delta / 2


def slice_gate():
    """Gate: each slice's share of the slices' part, the upper and the lower
    limit at half the share each."""
    header = ["rule", "failure_probability", "champion", "slice_count", "slice", "error_count",
              "sample_count", "share", "upper", "lower", "upper_outward", "lower_outward",
              "weight"]
    rows = []
    for delta in [0.05, 0.1, 1e-4]:
        for champion in [0, 1]:
            for g in [3, 6]:
                slices = SLICES[:g]
                for per_slice in rule_shares(gate_part(delta, champion), g):
                    for (name, k, n), (rule, share, weight) in zip(slices, per_slice):
                        u, lo = checked_upper(n, k, share / 2), checked_lower(n, k, share / 2)
                        rows.append([rule, delta, champion, g, name, k, n, share, u, lo,
                                     *mp_limits(n, k, share / 2, u, lo), weight])
    return header, rows


def slice_gate_boundary():
    """Per slice, without a champion: k_max_clears, the most errors whose
    upper limit (at half the share) is <= max_slice_risk (-1: none);
    k_min_exceeds, the fewest whose lower limit is > max_slice_risk
    (sample_count + 1: none). Linear scans over the error count."""
    header = ["rule", "failure_probability", "slice_count", "sample_count", "max_slice_risk",
              "k_max_clears", "k_min_exceeds"]
    rows = []
    setups = [(0.05, [200, 500, 1000, 3000], 0.05), (0.05, [300, 300, 2000], 0.1),
              (0.01, [1000, 5000, 400, 800, 2500], 0.02), (0.2, [100, 900], 0.3)]
    for delta, sizes, eps in setups:
        g = len(sizes)
        for rule, share_of in SHARE_RULES:
            half = share_of(gate_part(delta, False), g) / 2
            for n in sizes:
                k_max, k_min = verdict_boundaries(n, eps, half)
                rows.append([rule, delta, g, n, eps, k_max, k_min])
    return header, rows


FIXTURES = {
    "slice_certify.csv": slice_certify,
    "slice_gate.csv": slice_gate,
    "slice_gate_boundary.csv": slice_gate_boundary,
}
