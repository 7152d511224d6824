"""Reference values for select's heuristic mode (ranking by fitted effective
VC dimensions), recomputed in plain Python floating point, independently of
the C++ code.

Source: the VC formulas as published, with a real h in place of the integer
VC dimension: the additive form R_emp + sqrt((ln Pi(2m) - ln(delta/4)) / m)
+ 1/m (Vapnik 1995, ch. 3; Burges 1998, eq. (3); the +1/m is the conservative
form riskbound uses) and the relative form R_emp + (E/2)(1 + sqrt(1 + 4 R_emp
/ E)), E = 4 (ln Pi(2m) - ln(delta/4)) / m (Vapnik 1998, ch. 4), with ln
Pi(2m) <= min(h (ln(2m/h) + 1), 2m ln 2) (Sauer-Shelah). Each candidate k is
scored at its share of delta (uniform delta/K, or delta * 6/(pi^2 k^2)), and
the ranking is by increasing score, ties to the earlier candidate.

The structures are invented: boosted-tree depths whose h_hat came from
effective VC fits (the fourth one below its predecessor, as noisy fits can
be).
"""
import math


def log_growth(h, m):
    trivial = 2.0 * m * math.log(2.0)
    if h <= 0.0:
        return 0.0
    if h >= 2.0 * m:
        return trivial
    return min(h * (math.log(2.0 * m / h) + 1.0), trivial)


def additive(k, m, h, delta):
    rate = k / m
    return rate + math.sqrt((log_growth(h, m) + math.log(4.0) - math.log(delta)) / m) + 1.0 / m


def relative(k, m, h, delta):
    rate = k / m
    e = 4.0 * (log_growth(h, m) + math.log(4.0) - math.log(delta)) / m
    return rate + (e / 2.0) * (1.0 + math.sqrt(1.0 + 4.0 * rate / e))


CASES = [
    # (case, family, spread, delta, m, [(id, errors, h_hat), ...])
    ("trees_additive", "vc-additive", "uniform", 0.05, 2000,
     [("depth-1", 420, 3.1), ("depth-2", 300, 7.4), ("depth-3", 240, 15.2),
      ("depth-4", 214, 13.9), ("depth-5", 205, 61.0)]),
    ("trees_relative", "vc-relative", "inverse_square", 0.05, 2000,
     [("depth-1", 420, 3.1), ("depth-2", 300, 7.4), ("depth-3", 240, 15.2),
      ("depth-4", 214, 13.9), ("depth-5", 205, 61.0)]),
    ("large_sample", "vc-additive", "inverse_square", 0.01, 100000,
     [("stump", 21000, 2.64), ("pair", 15000, 5.8), ("net-s", 9000, 180.5),
      ("net-m", 8200, 950.25), ("net-l", 8100, 4100.0)]),
]


def select_heuristic():
    header = ["case", "family", "spread", "failure_probability", "candidate_count", "index",
              "id", "error_count", "sample_count", "effective_vc_dimension", "share", "score",
              "rank", "chosen"]
    rows = []
    for case, family, spread, delta, m, cands in CASES:
        count = len(cands)
        scores = []
        for i, (_, k, h) in enumerate(cands):
            if spread == "uniform":
                share = delta / count
            else:
                share = delta * 6.0 / (math.pi ** 2 * (i + 1) ** 2)
            f = additive if family == "vc-additive" else relative
            scores.append((share, f(k, m, h, share)))
        order = sorted(range(count), key=lambda i: (scores[i][1], i))
        rank = {i: r for r, i in enumerate(order)}
        for i, (cid, k, h) in enumerate(cands):
            rows.append([case, family, spread, delta, count, i, cid, k, m, h, scores[i][0],
                         scores[i][1], rank[i], i == order[0]])
    return header, rows


FIXTURES = {
    "select_heuristic.csv": select_heuristic,
}
