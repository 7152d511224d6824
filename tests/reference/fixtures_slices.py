"""Per-slice reference values from scipy: one-sided Clopper-Pearson limits at
the slices' shares, for Certify and for the promotion gate, and the error
counts where a slice's gate outcome flips.

Shares: Bonferroni (1936), delta_slices / G; Sidak (1967),
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
from fixtures_gate import checked_lower, checked_upper, cp_lower, cp_upper  # noqa: E402

mpmath.mp.dps = 50

# (name, error_count, sample_count): slices of different sizes, with zero
# errors, all errors and ordinary rates.
SLICES = [("north", 12, 900), ("south", 40, 500), ("coast", 3, 300), ("inland", 0, 1200),
          ("islands", 7, 7), ("metro", 250, 20000)]


def bonferroni_share(total, g):
    return total / g


def sidak_share(total, g):
    """1 - (1 - total)^(1/g) in numpy, checked at 50 digits with mpmath."""
    value = float(-numpy.expm1(numpy.log1p(-total) / g))
    exact = 1 - mpmath.power(1 - mpmath.mpf(total), mpmath.mpf(1) / g)
    assert abs(mpmath.mpf(value) - exact) <= mpmath.mpf(1e-14) * exact, (total, g, value)
    return value


SHARE_RULES = [("bonferroni", bonferroni_share), ("sidak", sidak_share)]


def slice_certify():
    """Certify: each slice's upper and lower limit at its whole share (the
    certificate's failure_probability is its share; its interval's two
    sides are each one-sided at that share, as the hold-out exact binomial
    family states)."""
    header = ["case", "rule", "failure_probability", "slice_count", "slice", "error_count",
              "sample_count", "share", "upper", "lower"]
    rows = []
    for case, part in [("slices-only", 1.0), ("with-holdout", 0.5)]:
        for delta in [0.05, 0.01, 1e-6]:
            for g in [3, 6]:
                slices = SLICES[:g]
                for rule, share_of in SHARE_RULES:
                    total = delta * part  # halving is exact in binary
                    share = share_of(total, g)
                    for name, k, n in slices:
                        rows.append([case, rule, delta, g, name, k, n, share,
                                     checked_upper(n, k, share), checked_lower(n, k, share)])
    return header, rows


def gate_part(delta, champion):
    return delta / 3 if champion else delta / 2


def slice_gate():
    """Gate: each slice's share of the slices' part, the upper and the lower
    limit at half the share each."""
    header = ["rule", "failure_probability", "champion", "slice_count", "slice", "error_count",
              "sample_count", "share", "upper", "lower"]
    rows = []
    for delta in [0.05, 0.1, 1e-4]:
        for champion in [0, 1]:
            for g in [3, 6]:
                slices = SLICES[:g]
                for rule, share_of in SHARE_RULES:
                    share = share_of(gate_part(delta, champion), g)
                    for name, k, n in slices:
                        rows.append([rule, delta, champion, g, name, k, n, share,
                                     checked_upper(n, k, share / 2),
                                     checked_lower(n, k, share / 2)])
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
                k_max = -1
                for k in range(n + 1):
                    if cp_upper(n, k, half) <= eps:
                        k_max = k
                    else:
                        break
                k_min = n + 1
                for k in range(n + 1):
                    if cp_lower(n, k, half) > eps:
                        k_min = k
                        break
                rows.append([rule, delta, g, n, eps, k_max, k_min])
    return header, rows


FIXTURES = {
    "slice_certify.csv": slice_certify,
    "slice_gate.csv": slice_gate,
    "slice_gate_boundary.csv": slice_gate_boundary,
}
