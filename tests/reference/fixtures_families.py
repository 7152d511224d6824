"""Reference values for the bounded-loss, PAC-Bayes, Rademacher and
sample-compression families, computed independently of the C++ code.

Bounded loss: per-example losses drawn with numpy (fixed seeds); mean and
unbiased variance by numpy; Hoeffding (1963) and Maurer & Pontil (2009,
Thm 4) in closed form, the kl-Chernoff limits by scipy.optimize.brentq on the
loss rescaled to [0, 1]. PAC-Bayes: McAllester (2003), Maurer (2004) /
Seeger (2002) kl form by brentq, Catoni (2007) over the fixed grid of C.
Rademacher: Mohri et al. (2018) Thm 3.5 in closed form, McDiarmid slack for
sampled complexities. Sample compression: Binbar(m-d, k, delta/(m C(m,d)))
with ln C(m,d) from exact integer arithmetic (math.comb) and the binomial
tail inversion by brentq on the log CDF (scipy.special.logsumexp), so tiny
levels never underflow.
"""
import math
import os
import sys

import numpy as np
from scipy import optimize, special

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
from fixtures_holdout import kl_lower, kl_upper  # noqa: E402  (same careful kl)

NAN = float("nan")


# ---------------------------------------------------------------- bounded loss
def _back(a, b, z):
    if z <= 0:
        return a
    if z >= 1:
        return b
    return min(a + (b - a) * z, b)


def bounded_loss():
    header = ["samples", "loss_min", "loss_max", "mean_loss", "sample_variance", "delta",
              "hoeffding_upper", "hoeffding_lower", "kl_upper", "kl_lower", "eb_upper",
              "eb_lower"]
    rng = np.random.default_rng(20240611)
    cases = []
    for n in [1, 2, 10, 200, 1000, 100000]:
        # (loss_min, loss_max, draw in units of the range)
        cases.append((n, 0.0, 1.0, rng.beta(0.5, 5.0, size=n)))
        cases.append((n, 0.0, 1.0, rng.beta(2.0, 2.0, size=n)))
        cases.append((n, -2.0, 3.0, rng.uniform(0.0, 1.0, size=n) ** 3))
        cases.append((n, 0.0, 250.0, rng.binomial(1, 0.1, size=n).astype(float)))
        cases.append((n, 0.0, 1.0, np.zeros(n)))          # all at loss_min
        cases.append((n, 0.0, 1.0, np.ones(n)))           # all at loss_max
        cases.append((n, 10.0, 20.0, np.full(n, 0.3)))    # variance 0 inside
    rows = []
    for n, a, b, unit in cases:
        x = a + (b - a) * unit
        x = np.clip(x, a, b)
        mean = float(np.mean(x))
        var = float(np.var(x, ddof=1)) if n >= 2 else 0.0
        for delta in [0.999, 0.05, 1e-6, 1e-300]:
            w = b - a
            z = min(max((mean - a) / w, 0.0), 1.0)
            hs = math.sqrt(math.log(1 / delta) / (2 * n))
            c = math.log(1 / delta) / n
            if n >= 2:
                vz = min(max(var / w / w, 0.0), 0.25 * n / (n - 1))
                L = math.log(2 / delta)
                es = math.sqrt(2 * vz * L / n) + 7 * L / (3 * (n - 1))
                eb_up, eb_lo = _back(a, b, z + es), _back(a, b, z - es)
            else:
                eb_up, eb_lo = NAN, NAN
            rows.append([n, a, b, mean, var, delta,
                         _back(a, b, z + hs), _back(a, b, z - hs),
                         _back(a, b, kl_upper(z, c)), _back(a, b, kl_lower(z, c)),
                         eb_up, eb_lo])
    return header, rows


# ---------------------------------------------------------------- PAC-Bayes
CATONI_GRID = [0.125, 0.25, 0.5, 1.0, 2.0, 4.0, 8.0, 16.0, 32.0]


def catoni_at(remp, kl, m, c, delta):
    return -math.expm1(-c * remp - (kl + math.log(1 / delta)) / m) / -math.expm1(-c)


def pac_bayes():
    header = ["samples", "kl_divergence", "gibbs_empirical_risk", "delta", "mcallester",
              "kl_upper", "kl_lower", "catoni", "catoni_best_c"]
    rows = []
    for m in [1, 2, 7, 8, 100, 10000, 10**6, 10**15]:
        for kl in [0.0, 1.0, 500.0, 1e6]:
            for remp in [0.0, 0.03, 0.5, 1.0]:
                for delta in [0.999, 0.05, 1e-300]:
                    mca = min(1.0, remp + math.sqrt((kl + math.log(1 / delta) + math.log(m) + 2)
                                                    / (2 * m - 1)))
                    if m >= 8:
                        term = math.log(2 * math.sqrt(m) / delta)
                    else:
                        term = math.log((m + 1) / delta)
                    budget = (kl + term) / m
                    vals = [catoni_at(remp, kl, m, c, delta / len(CATONI_GRID))
                            for c in CATONI_GRID]
                    best = min(range(len(vals)), key=lambda i: vals[i])
                    rows.append([m, kl, remp, delta, mca, kl_upper(remp, budget),
                                 kl_lower(remp, budget), min(1.0, vals[best]),
                                 CATONI_GRID[best]])
    return header, rows


# ---------------------------------------------------------------- Rademacher
def rademacher():
    header = ["samples", "errors", "empirical_rademacher", "sigma_draws", "delta", "upper"]
    rows = []
    for m in [1, 10, 200, 10**4, 10**6, 10**15]:
        for frac in [0.0, 0.05, 0.5]:
            k = int(round(frac * m))
            for rhat in [0.0, 0.0521, 0.3, 1.0]:
                for draws in [0, 1, 20, 10**6]:
                    for delta in [0.999, 0.05, 1e-300]:
                        if draws == 0:
                            comp, main = rhat, delta
                        else:
                            comp = max(0.0, rhat + math.sqrt(2 * math.log(2 / delta) / (m * draws)))
                            main = delta / 2
                        up = k / m + comp + 3 * math.sqrt(math.log(2 / main) / (2 * m))
                        rows.append([m, k, rhat, draws, delta, min(1.0, up)])
    return header, rows


# ---------------------------------------------------------------- compression
def log_comb_exact(n, k):
    k = min(k, n - k)
    return 0.0 if k <= 0 else math.log(math.comb(n, k))


def log_binom_terms(n, k):
    """ln C(n, j) for j = 0..k, and j as floats."""
    j = np.arange(k + 1, dtype=float)
    if n <= 10**7:
        lc = special.gammaln(n + 1) - special.gammaln(j + 1) - special.gammaln(n - j + 1)
    else:  # exact integers: gammaln(1e15) has an ulp of 4
        lc = np.array([math.log(math.comb(n, int(i))) for i in range(k + 1)])
    return j, lc


def log_binom_cdf(n, terms, p):
    """ln P(Bin(n, p) <= k) by log-sum-exp of the pmf terms."""
    j, lc = terms
    return float(special.logsumexp(lc + j * math.log(p) + (n - j) * math.log1p(-p)))


def binbar_log(n, k, log_level):
    if k >= n:
        return 1.0
    if k == 0:
        return -math.expm1(log_level / n)
    q = k / n
    hi = kl_upper(q, -log_level / n)  # Chernoff: never below the exact limit
    terms = log_binom_terms(n, k)
    f = lambda p: log_binom_cdf(n, terms, p) - log_level
    if hi >= 1.0 or f(hi) > 0:
        hi = 1 - 1e-16
        if f(hi) > 0:  # the limit lies within 1e-16 of 1
            return 1.0
    lo = q
    if f(lo) < 0:  # level above P(Bin(n, k/n) <= k): the raw limit is below k/n
        lo = 1e-300
    return optimize.brentq(f, lo, hi, xtol=1e-300, rtol=1e-15, maxiter=1000)


def compression():
    header = ["samples", "compression_size", "errors_outside", "fixed", "delta", "log_choose",
              "log_level", "upper"]
    rows = []
    for m in [1, 2, 10, 100, 10000, 10**6, 10**15]:
        ds = {0, 1, m - 1, m}
        if m >= 10000:
            ds.add(300)
        if m <= 10**6:
            ds.add(m // 100)
        for d in sorted(x for x in ds if 0 <= x <= m):
            n = m - d
            ks = {0, 1, n // 10, n} if m <= 10**6 else {0, 1, 5, n}
            if m == 10000 and d == 300:
                ks.add(150)
            for k in sorted(x for x in ks if 0 <= x <= n):
                for fixed in [False, True]:
                    for delta in [0.999, 0.05, 1e-300]:
                        log_choose = log_comb_exact(m, d)
                        log_level = math.log(delta) - log_choose - (
                            0.0 if fixed else math.log(m))
                        # A certificate never puts the upper bound below k/(m-d).
                        up = 1.0 if n == 0 else max(binbar_log(n, k, log_level), k / n)
                        rows.append([m, d, k, fixed, delta, log_choose, log_level, up])
    # Regression rows: inputs whose inversion once summed all k + 1 terms at
    # every bisection step (0.3 s to seconds of CPU each); same reference.
    for m, d, k in [(100000, 1000, 89100), (1001000, 1000, 100000), (1001000, 1000, 900000)]:
        n = m - d
        for delta in [0.05, 1e-300]:
            log_choose = log_comb_exact(m, d)
            log_level = math.log(delta) - log_choose - math.log(m)
            up = max(binbar_log(n, k, log_level), k / n)
            rows.append([m, d, k, False, delta, log_choose, log_level, up])
    return header, rows


FIXTURES = {
    "bounded_loss.csv": bounded_loss,
    "pac_bayes.csv": pac_bayes,
    "rademacher.csv": rademacher,
    "compression.csv": compression,
}
