"""Anytime-valid hold-out limits (issue 15) from scipy, written independently
of service/core/anytime.cc.

The one-sided beta-binomial mixture martingale (Robbins 1970; Ville 1939;
one-sided form after Howard, Ramdas, McAuliffe & Sekhon 2021): for a tested
rate p0 and the prior Beta(c p0, c (1 - p0)) truncated to p < p0,

    ln M_n(p0) = betaln(a + k, b + n - k) + ln betainc(a + k, b + n - k, p0)
                 - k ln p0 - (n - k) ln(1 - p0)
                 - betaln(a, b) - ln betainc(a, b, p0),

with a = c p0, b = c (1 - p0) and c = n0 / (2 ln(1/delta) + ln(1 + 2 ln(1/delta)));
the martingale inverted is the equal-weight mixture of the components
n0 = 10^2, 10^3, 10^4, 10^5, 10^6 (scipy.special.logsumexp).
The upper limit is the root of ln M_n(p0) = ln(1/delta) above k/n
(scipy.optimize.brentq); the lower limit is 1 - upper(n, n - k) (the prior is
symmetric under p <-> 1 - p). Here the two huge log terms are subtracted
directly (the C++ code avoids that with ibeta_derivative), so the values agree
only if both are right. The fixed-n Clopper-Pearson limit (scipy.stats.beta.isf)
is listed beside, for the width ratio.

Rows whose limit lies within about 1e-4 of 0 or 1 at small n (1 error in 100,
999 in 1000) are left out: there the prior Beta(c p0, c (1 - p0)) has a
parameter near 0.01, and scipy.special.betainc loses digits (an mpmath check
at 50 digits, run by hand, agreed with the C++ value to 4e-10 and with scipy
only to 4e-4).
"""
import math

from scipy import optimize, special, stats

TUNED = (100, 1000, 10000, 100000, 1000000)


def concentration(delta, tuned=10000):
    l = -math.log(delta)
    return tuned / (2 * l + math.log1p(2 * l))


def log_m_upper(n, k, p0, c):
    a, b = c * p0, c * (1 - p0)
    num = special.betaln(a + k, b + n - k) + math.log(special.betainc(a + k, b + n - k, p0))
    den = special.betaln(a, b) + math.log(special.betainc(a, b, p0))
    return num - den - k * math.log(p0) - (n - k) * math.log1p(-p0)


def log_mixture(n, k, p0, delta):
    terms = [log_m_upper(n, k, p0, concentration(delta, t)) for t in TUNED]
    return float(special.logsumexp(terms) - math.log(len(TUNED)))


def upper(n, k, delta):
    if k >= n:
        return 1.0
    t = -math.log(delta)
    lo = k / n if k > 0 else 1e-300
    hi = 1 - 1e-15
    return optimize.brentq(lambda p: log_mixture(n, k, p, delta) - t, lo, hi,
                           xtol=1e-300, rtol=1e-14, maxiter=1000)


def lower(n, k, delta):
    return 0.0 if k == 0 else 1.0 - upper(n, n - k, delta)


def anytime():
    header = ["samples", "errors", "delta", "upper", "lower", "cp_upper"]
    rows = []
    for n, ks in [(10, [0, 3, 10]), (100, [0, 5, 50]), (1000, [0, 10, 50, 500]),
                  (10000, [0, 100, 500, 5000]), (100000, [0, 1000, 5000, 50000])]:
        for k in ks:
            for delta in (0.05, 0.0125, 0.001):
                cp = 1.0 if k >= n else float(stats.beta.isf(delta, k + 1, n - k))
                rows.append([n, k, delta, upper(n, k, delta), lower(n, k, delta), cp])
    return header, rows


def martingale():
    """ln M_n(p0) of the component tuned for 10^4 and of the mixture."""
    header = ["samples", "errors", "delta", "p0", "log_m", "log_mixture"]
    rows = []
    for n, k, delta in [(1000, 50, 0.025), (10000, 500, 0.0125), (100, 0, 0.05)]:
        c = concentration(delta)
        for p0 in (0.01, 0.05, 0.06, 0.07, 0.1, 0.3):
            if p0 > k / n:
                rows.append([n, k, delta, p0, log_m_upper(n, k, p0, c),
                             log_mixture(n, k, p0, delta)])
    return header, rows


FIXTURES = {"anytime.csv": anytime, "anytime_martingale.csv": martingale}
