"""Promotion-gate reference values from scipy: McNemar p-values, Clopper-Pearson
difference limits, and the error counts where the gate's verdict flips.

McNemar: scipy.stats.binomtest(b, b + c, 0.5, alternative='less').pvalue,
cross-checked against the exact sum of binomial coefficients (fractions) for
small b + c. Clopper-Pearson limits: scipy.stats.beta.isf / beta.ppf (the
complement inverse), cross-checked by brentq on scipy.stats.binom.cdf /
binom.sf. Verdict boundaries: linear scans over the error count (brute force).
"""
import math
from fractions import Fraction

from scipy import optimize, stats


def cp_upper(n, k, delta):
    return 1.0 if k >= n else float(stats.beta.isf(delta, k + 1, n - k))


def cp_lower(n, k, delta):
    return 0.0 if k == 0 else float(stats.beta.ppf(delta, k, n - k + 1))


def cp_upper_by_cdf(n, k, delta):
    """max p with P(Bin(n, p) <= k) >= delta, by root finding on the CDF."""
    if k >= n:
        return 1.0
    return optimize.brentq(lambda p: stats.binom.cdf(k, n, p) - delta, 0.0, 1.0,
                           xtol=1e-15, rtol=1e-13, maxiter=500)


def cp_lower_by_sf(n, k, delta):
    """min p with P(Bin(n, p) >= k) >= delta, by root finding on the tail."""
    if k == 0:
        return 0.0
    return optimize.brentq(lambda p: stats.binom.sf(k - 1, n, p) - delta, 0.0, 1.0,
                           xtol=1e-15, rtol=1e-13, maxiter=500)


def checked_upper(n, k, delta):
    a, b = cp_upper(n, k, delta), cp_upper_by_cdf(n, k, delta)
    assert abs(a - b) <= 1e-8 * max(a, 1e-12), (n, k, delta, a, b)
    return a


def checked_lower(n, k, delta):
    a, b = cp_lower(n, k, delta), cp_lower_by_sf(n, k, delta)
    assert abs(a - b) <= 1e-8 * max(a, 1e-12), (n, k, delta, a, b)
    return a


def mcnemar():
    header = ["b", "c", "p_value"]
    pairs = [(10, 25), (0, 1), (1, 0), (0, 50), (50, 0), (25, 25), (30, 20), (3, 17),
             (100, 140), (500, 600), (4000, 4200), (10000, 10300), (0, 1000),
             (123456, 124800)]
    rows = []
    for b, c in pairs:
        p = float(stats.binomtest(b, b + c, 0.5, alternative="less").pvalue)
        if b + c <= 200:
            exact = Fraction(sum(math.comb(b + c, i) for i in range(b + 1)), 2 ** (b + c))
            assert abs(p - float(exact)) <= 1e-12 * float(exact) + 1e-300, (b, c, p)
        rows.append([b, c, p])
    return header, rows


def paired_difference():
    """Delta <= Binbar(n, b, d/2) - Binlow(n, c, d/2) and its mirror image."""
    header = ["samples", "b", "c", "delta", "upper", "lower"]
    rows = []
    for n, b, c in [(100, 5, 3), (1000, 50, 30), (1000, 0, 12), (1000, 12, 0),
                    (12345, 400, 420), (10**6, 1500, 1000), (500, 500, 0), (300, 0, 0)]:
        for delta in [0.05, 0.0125, 1e-6]:
            h = delta / 2
            rows.append([n, b, c, delta,
                         checked_upper(n, b, h) - checked_lower(n, c, h),
                         checked_lower(n, b, h) - checked_upper(n, c, h)])
    return header, rows


def unpaired_difference():
    """Delta <= Binbar(n1, k1, d/2) - Binlow(n2, k2, d/2) and its mirror image."""
    header = ["challenger_samples", "challenger_errors", "champion_samples",
              "champion_errors", "delta", "upper", "lower"]
    rows = []
    for n1, k1, n2, k2 in [(1000, 30, 1000, 40), (500, 10, 2000, 60), (100, 0, 100, 0),
                           (10**5, 2000, 50000, 900), (50, 50, 50, 0)]:
        for delta in [0.05, 0.0125, 1e-4]:
            h = delta / 2
            rows.append([n1, k1, n2, k2, delta,
                         checked_upper(n1, k1, h) - checked_lower(n2, k2, h),
                         checked_lower(n1, k1, h) - checked_upper(n2, k2, h)])
    return header, rows


def verdict_boundaries(n, eps, delta):
    """Brute-force scan over the error count k of n samples, both
    Clopper-Pearson limits at delta: (k_max, k_min) with k_max the most errors
    whose upper limit is <= eps (-1: none) and k_min the fewest whose lower
    limit is > eps (n + 1: none)."""
    k_max = -1
    for k in range(n + 1):
        if cp_upper(n, k, delta) <= eps:
            k_max = k
        else:
            break
    k_min = n + 1
    for k in range(n + 1):
        if cp_lower(n, k, delta) > eps:
            k_min = k
            break
    return k_max, k_min


def gate_risk_boundary():
    """Without a champion the gate spends delta/2 on the Clopper-Pearson upper
    limit and delta/2 on the lower one. k_max_promote: the most hold-out
    errors whose upper limit is <= max_risk (-1: none); k_min_reject: the
    fewest whose lower limit is > max_risk (n + 1: none)."""
    header = ["samples", "max_risk", "delta", "k_max_promote", "k_min_reject"]
    rows = []
    for n, eps, delta in [(1000, 0.05, 0.05), (300, 0.1, 0.05), (5000, 0.02, 0.01),
                          (100, 0.2, 0.1), (20000, 0.01, 0.05), (2000, 0.3, 0.2)]:
        k_max, k_min = verdict_boundaries(n, eps, delta / 2)
        rows.append([n, eps, delta, k_max, k_min])
    return header, rows


def gate_paired_boundary():
    """With a paired champion the gate spends delta/4 on each difference limit,
    so each Clopper-Pearson limit inside it is at delta/8. For fixed n and c
    (only the champion wrong): b_max_promote, the largest b (only the
    candidate wrong) with Binbar(n, b, d/8) - Binlow(n, c, d/8) <= tolerance
    (-1: none); b_min_reject, the smallest b with Binlow(n, b, d/8) -
    Binbar(n, c, d/8) > tolerance (n - c + 1: none)."""
    header = ["samples", "c", "delta", "tolerance", "b_max_promote", "b_min_reject"]
    rows = []
    for n, c, delta, t in [(2000, 40, 0.05, 0.0), (2000, 40, 0.05, 0.01),
                           (10000, 150, 0.1, 0.005), (3000, 120, 0.05, -0.01)]:
        e = delta / 8
        low_c, up_c = cp_lower(n, c, e), cp_upper(n, c, e)
        b_max = -1
        for b in range(n - c + 1):
            if cp_upper(n, b, e) - low_c <= t:
                b_max = b
            else:
                break
        b_min = n - c + 1
        for b in range(n - c + 1):
            if cp_lower(n, b, e) - up_c > t:
                b_min = b
                break
        rows.append([n, c, delta, t, b_max, b_min])
    return header, rows


FIXTURES = {
    "mcnemar.csv": mcnemar,
    "paired_difference.csv": paired_difference,
    "unpaired_difference.csv": unpaired_difference,
    "gate_risk_boundary.csv": gate_risk_boundary,
    "gate_paired_boundary.csv": gate_paired_boundary,
}
