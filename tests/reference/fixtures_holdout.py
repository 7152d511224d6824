"""Hold-out, VC and finite-class reference values from scipy (issue: walking skeleton).

Clopper-Pearson limits: scipy.stats.beta.isf / beta.ppf (the complement
inverse, never a quantile at 1 - delta). Binary-KL inverses: scipy.optimize.brentq
on kl(q||p) - c. The Burges (1998) VC-confidence crossover: brentq on the VC
confidence equation.
"""
import math

from scipy import optimize, stats


def kl(q, p):
    """Bernoulli KL, written as q f(d/q) + (1-q) f(-d/(1-q)) with d = p - q and
    f(x) = x - log1p(x) (an exact identity) so that it keeps its precision
    when p is close to q."""
    if q <= 0:
        return -math.log1p(-p)
    if q >= 1:
        return -math.log(p)
    def f(x, log1p_x):
        return x * x * (0.5 - x * (1 / 3 - x * (0.25 - x / 5))) if abs(x) < 1e-4 else x - log1p_x
    d = p - q
    first = f(d / q, math.log(p) - math.log(q)) if p > 0 else math.inf
    second = f(-d / (1 - q), math.log1p(-p) - math.log1p(-q)) if p < 1 else math.inf
    return q * first + (1 - q) * second


def kl_upper(q, c):
    if c <= 0:
        return q
    if q >= 1:
        return 1.0
    hi = 1 - 1e-16
    if kl(q, hi) <= c:
        return 1.0
    return optimize.brentq(lambda p: kl(q, p) - c, q, hi, xtol=1e-15, rtol=1e-15, maxiter=500)


def kl_lower(q, c):
    if c <= 0:
        return q
    if q <= 0:
        return 0.0
    lo = 1e-300
    if kl(q, lo) <= c:
        return 0.0
    return optimize.brentq(lambda p: kl(q, p) - c, lo, q, xtol=1e-15, rtol=1e-15, maxiter=500)


def cp_upper(n, k, delta):
    return 1.0 if k >= n else float(stats.beta.isf(delta, k + 1, n - k))


def cp_lower(n, k, delta):
    return 0.0 if k == 0 else float(stats.beta.ppf(delta, k, n - k + 1))


def holdout():
    header = ["samples", "errors", "delta", "cp_upper", "cp_lower", "kl_upper", "kl_lower"]
    rows = []
    for n in [1, 2, 10, 100, 300, 1000, 12345, 10**6, 10**9]:
        ks = sorted({0, 1, n // 10, n // 2, n - 1, n})
        for k in ks:
            if k < 0 or k > n:
                continue
            for delta in [0.999, 0.5, 0.05, 1e-3, 1e-9]:
                c = math.log(1 / delta) / n
                q = k / n
                rows.append([n, k, delta, cp_upper(n, k, delta), cp_lower(n, k, delta),
                             kl_upper(q, c), kl_lower(q, c)])
    return header, rows


def occam_kl():
    """kl inverse at the Occam budget (ln|H| + ln(1/delta)) / m."""
    header = ["samples", "errors", "log_hypothesis_count", "delta", "kl_upper", "kl_lower"]
    rows = []
    for m in [50, 5000, 10**6]:
        for k_frac in [0.0, 0.05, 0.3]:
            k = int(round(k_frac * m))
            for log_h in [0.0, math.log(101), math.log(1e6), 500.0]:
                for delta in [0.05, 1e-6]:
                    c = (log_h + math.log(1 / delta)) / m
                    rows.append([m, k, log_h, delta, kl_upper(k / m, c), kl_lower(k / m, c)])
    return header, rows


def vc_crossover():
    """Burges (1998): at delta = 0.05 and l = 10000 the VC confidence
    sqrt((h (ln(2l/h) + 1) - ln(delta/4)) / l) reaches 1 at h/l ~ 0.37."""
    l, delta = 10000, 0.05
    f = lambda x: x * (math.log(2 / x) + 1) + math.log(4 / delta) / l - 1
    x = optimize.brentq(f, 0.01, 1.0, xtol=1e-15)
    first_h = math.floor(x * l) + 1
    return ["samples", "delta", "crossover_ratio", "first_vacuous_h"], [[l, delta, x, first_h]]


def log_choose():
    """ln C(n, k) from exact integer arithmetic (math.comb; math.log of a big int)."""
    rows = []
    for n in [10, 52, 1000, 10**6, 10**9, 10**12, 10**15, 2**53]:
        for k in [1, 2, 5, 300, 10**4]:
            if k <= n:
                rows.append([n, k, math.log(math.comb(n, k))])
    return ["n", "k", "log_choose"], rows


FIXTURES = {
    "log_choose.csv": log_choose,
    "holdout.csv": holdout,
    "occam_kl.csv": occam_kl,
    "vc_crossover.csv": vc_crossover,
}
