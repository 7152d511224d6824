"""Sample-size planning reference values, by brute force.

Every answer here is found by a plain linear scan over n (numpy arrays), not by
the logarithmic search the C++ planner uses, so the two agree only if the
search and its sawtooth shortcut are right.

Conventions (the planner's, see service/core/plan.h):
* anticipated errors at n samples: k(n) = ceil(rate * n) in double precision;
* "robust" answer: the first n with bound(n, k(n)) <= target and the same for
  every n' in (n, n + ceil(2/rate)] (a guard against the sawtooth of the
  binomial tail in n);
* pass probability at n: P(Bin(n, p) <= k_max(n)) with
  k_max(n) = max {k : CP upper(n, k, delta) <= target} (a standard power
  calculation), first n reaching the requested probability.

Clopper-Pearson upper limits: scipy.stats.beta.isf (complement inverse).
Binomial CDF: scipy.special.bdtr. The VC and Occam bounds are written out
here from the published forms (Vapnik 1998 Ch. 4 / Burges 1998 eq. 3; Vapnik
1998 relative deviation bound; Hoeffding 1963 and Langford 2005 for Occam),
independently of the C++ code;
the kl inverse by vectorized bisection (60 halvings, conservative end).
"""
import math

import numpy as np
from scipy import special, stats


def cp_upper(n, k, delta):
    """Vectorized one-sided Clopper-Pearson upper limit; 1 where k >= n."""
    n = np.asarray(n, dtype=float)
    k = np.asarray(k, dtype=float)
    out = np.ones(np.broadcast(n, k).shape)
    inside = k < n
    kk = np.broadcast_to(k, out.shape)[inside]
    nn = np.broadcast_to(n, out.shape)[inside]
    out[inside] = stats.beta.isf(delta, kk + 1, nn - kk)
    return np.maximum(out, np.broadcast_to(k / n, out.shape))


def errors_at(rate, n):
    return np.minimum(np.ceil(rate * n.astype(float)), n)


def first_robust(ok, ns, window):
    """First index i with ok[i..i+window] all true (ok over consecutive ns)."""
    bad = np.concatenate([[0], np.cumsum(~ok)])
    for i in np.flatnonzero(ok):
        j = min(i + window + 1, len(ok))
        if i + window + 1 > len(ok):
            return None  # window runs off the scanned range
        if bad[j] - bad[i] == 0:
            return int(ns[i])
    return None


def scan(bound_fn, rate, start, target):
    """Robust first n >= start, doubling the scanned range until found."""
    window = math.ceil(2 / rate) if rate > 0 else 0
    length = 4096
    while True:
        ns = np.arange(start, start + length, dtype=np.int64)
        ok = bound_fn(ns, errors_at(rate, ns)) <= target
        got = first_robust(ok, ns, window)
        if got is not None:
            return got
        length *= 2


def k_max(ns, eps, delta):
    """max k with CP upper(n, k, delta) <= eps, per n (-1 when even k = 0 fails)."""
    lo = np.full(ns.shape, -1.0)           # largest known good (or -1)
    hi = ns.astype(float)                  # smallest known bad: CP(n, n) = 1 > eps
    while True:
        active = hi - lo > 1
        if not active.any():
            return lo
        mid = np.floor((lo + hi) / 2)
        good = cp_upper(ns, mid, delta) <= eps
        lo = np.where(active & good, mid, lo)
        hi = np.where(active & ~good, mid, hi)


def zero_failure(eps, delta):
    return math.ceil(math.log(delta) / math.log1p(-eps))


HOLDOUT_CASES = [
    # (eps, p, delta, pass probabilities)
    (0.05, 0.03, 0.05, [0.5, 0.8, 0.95]),   # 410 robust, 601 at 80% pass
    (0.01, 0.0, 0.05, [0.8]),               # zero expected errors (Hanley & Lippman-Hand 1983)
    (0.1, 0.05, 0.05, [0.8]),
    (0.02, 0.01, 0.01, [0.9]),
    (0.3, 0.2, 0.05, [0.8]),
    (0.05, 0.001, 0.05, [0.8]),
    (0.2, 0.15, 1e-3, [0.8]),
    (0.5, 0.4, 0.1, [0.6]),
    (0.011, 0.01, 0.05, [0.8]),
]


def holdout_plan():
    header = ["target_risk", "expected_risk", "delta", "pass_probability", "samples",
              "tolerated_errors", "pass_probability_at_plan", "zero_failure_samples"]
    rows = []
    for eps, p, delta, passes in HOLDOUT_CASES:
        n0 = zero_failure(eps, delta)
        start = max(1, n0 - 1)
        n95 = scan(lambda ns, ks: cp_upper(ns, ks, delta), p, start, eps)
        km = k_max(np.array([n95]), eps, delta)[0]
        rows.append([eps, p, delta, 0.0, n95, int(km), float(special.bdtr(km, n95, p)), n0])
        for target in passes:
            # First n whose pass probability reaches the target (plain scan).
            length = 4096
            s = start
            found = None
            while found is None:
                ns = np.arange(s, s + length, dtype=np.int64)
                km = k_max(ns, eps, delta)
                pp = np.where(km >= 0, special.bdtr(np.maximum(km, 0), ns, p), 0.0)
                hits = np.flatnonzero(pp >= target)
                if hits.size:
                    i = hits[0]
                    found = (int(ns[i]), int(km[i]), float(pp[i]))
                s += length
                length *= 2
            rows.append([eps, p, delta, target, found[0], found[1], found[2], n0])
    return header, rows


# ---- training-set bounds, written out from the published forms ----

def ln_growth(h, m):
    m = m.astype(float)
    trivial = 2 * m * math.log(2)
    if h == 0:
        return np.zeros_like(m)
    sauer = h * (np.log(2 * m / h) + 1)
    return np.where(h >= 2 * m, trivial, np.minimum(sauer, trivial))


def vc_additive(h, delta, plus_one_over_m=True):
    def f(m, k):
        md = m.astype(float)
        conf = np.sqrt((ln_growth(h, m) - math.log(delta / 4)) / md)
        return np.minimum(1.0, k / md + conf + (1 / md if plus_one_over_m else 0))
    return f


def vc_relative(h, delta):
    def f(m, k):
        md = m.astype(float)
        e = 4 * (ln_growth(h, m) - math.log(delta / 4)) / md
        r = k / md
        return np.minimum(1.0, r + e / 2 * (1 + np.sqrt(1 + 4 * r / e)))
    return f


def occam_hoeffding(log_h, delta):
    def f(m, k):
        md = m.astype(float)
        return np.minimum(1.0, k / md + np.sqrt((log_h - math.log(delta)) / (2 * md)))
    return f


def kl(q, p):
    with np.errstate(divide="ignore", invalid="ignore"):
        a = np.where(q > 0, q * np.log(q / p), 0.0)
        b = np.where(q < 1, (1 - q) * np.log((1 - q) / (1 - p)), 0.0)
    return a + b


def kl_upper(q, c):
    lo = q.copy()
    hi = np.ones_like(q)
    for _ in range(60):
        mid = (lo + hi) / 2
        good = kl(q, mid) <= c
        lo = np.where(good, mid, lo)
        hi = np.where(good, hi, mid)
    return hi


def occam_kl(log_h, delta):
    def f(m, k):
        md = m.astype(float)
        return kl_upper(k / md, (log_h - math.log(delta)) / md)
    return f


TRAINING_CASES = [
    # (family slug, capacity, bound maker, rate, target, delta)
    ("vc-additive", 100, lambda d: vc_additive(100, d), 0.05, 0.10, 0.05),  # vc_invert below
    ("vc-additive", 10, lambda d: vc_additive(10, d), 0.0, 0.10, 0.05),
    ("vc-additive", 50, lambda d: vc_additive(50, d), 0.02, 0.15, 0.01),
    ("vc-relative", 10, lambda d: vc_relative(10, d), 0.01, 0.05, 0.05),
    ("vc-relative", 100, lambda d: vc_relative(100, d), 0.0, 0.10, 0.05),
    ("occam-hoeffding", math.log(1e6), lambda d: occam_hoeffding(math.log(1e6), d), 0.05,
     0.10, 0.05),
    ("occam-hoeffding", math.log(1e6), lambda d: occam_hoeffding(math.log(1e6), d), 0.0,
     0.05, 0.05),
    ("occam-kl", math.log(1e6), lambda d: occam_kl(math.log(1e6), d), 0.05, 0.10, 0.05),
    ("occam-kl", math.log(101), lambda d: occam_kl(math.log(101), d), 0.0, 0.05, 0.05),
    ("occam-kl", 500.0, lambda d: occam_kl(500.0, d), 0.1, 0.2, 1e-3),
]


def real_rate_start(bound_fn, rate, target):
    """Smallest m with bound(m, rate * m) <= target (bound at the exact rate,
    monotone in m; a lower limit for the robust answer), by bisection."""
    def ok(m):
        a = np.array([m], dtype=np.int64)
        return bound_fn(a, np.array([rate * m]))[0] <= target
    lo, hi = 1, 2
    while not ok(hi):
        lo, hi = hi, hi * 2
    while hi - lo > 1:
        mid = (lo + hi) // 2
        if ok(mid):
            hi = mid
        else:
            lo = mid
    return hi


def training_plan():
    header = ["family", "capacity", "expected_empirical_risk", "target_risk", "delta",
              "samples"]
    rows = []
    for slug, cap, make, rate, target, delta in TRAINING_CASES:
        f = make(delta)
        start = max(1, real_rate_start(f, rate, target) - 1)
        rows.append([slug, float(cap), rate, target, delta, scan(f, rate, start, target)])
    return header, rows


def vc_invert():
    """Vapnik's bound inverted for m (R_emp = .05, h = 100, target .10, eta = .05)
    under three conventions: the common form of Burges (1998) eq. 3 (no +1/m,
    empirical rate exactly .05), the
    conservative +1/m at the exact rate, and the planner's (+1/m, ceil(.05 m)
    errors, robust to the sawtooth)."""
    h, rate, target, delta = 100, 0.05, 0.10, 0.05
    common = real_rate_start(vc_additive(h, delta, plus_one_over_m=False), rate, target)
    f = vc_additive(h, delta)
    exact_rate = real_rate_start(f, rate, target)
    planner = scan(f, rate, exact_rate - 1, target)
    return (["common_form_samples", "plus_one_over_m_samples", "planner_samples"],
            [[common, exact_rate, planner]])


FIXTURES = {
    "holdout_plan.csv": holdout_plan,
    "training_plan.csv": training_plan,
    "vc_invert.csv": vc_invert,
}
