"""The gate's HOLD plan honours policy.plan_pass_probability when the champion
comparison causes the HOLD: at the total the answer reports (samples held +
additional_sample_count) the paired difference limits settle the comparison
with at least that probability when the disagreement rates stay as observed.

The probability is recomputed here independently of the engine, by exact
enumeration over the disagreement counts: with n examples and the observed
rates p_b (only the candidate wrong) and p_c (only the champion wrong), B ~
Bin(n, p_b) and, given B, C ~ Bin(n - B, p_c / (1 - p_b)) (the trinomial's
conditional). Clopper-Pearson limits (Clopper & Pearson 1934) from
scipy.stats.beta quantiles at the comparison's share of delta (delta/4 split
into two one-sided limits at delta/8, gate.h), binomial terms from
scipy.stats.binom. Source: scipy.stats.beta.isf / beta.ppf / binom.pmf /
binom.sf / binom.cdf through /usr/bin/python3.

Usage: gate_plan_probability_test.py --server BIN --stubs DIR [unittest args]
"""
import math
import os
import sys
import unittest

import grpc
import numpy as np
from scipy import stats

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
from server_harness import ServerProcess, load_stubs, run_module_tests  # noqa: E402

ARGS = None


def cp_upper(n, k, level):
    """One-sided Clopper-Pearson upper limits for the counts k (array)."""
    k = np.asarray(k, dtype=float)
    out = np.ones_like(k)
    inner = k < n
    out[inner] = stats.beta.isf(level, k[inner] + 1, n - k[inner])
    return out


def cp_lower(n, k, level):
    """One-sided Clopper-Pearson lower limits for the counts k (array)."""
    k = np.asarray(k, dtype=float)
    out = np.zeros_like(k)
    inner = k > 0
    out[inner] = stats.beta.ppf(level, k[inner], n - k[inner] + 1)
    return out


def settle_probability(n, rate_b, rate_c, tolerance, delta_comparison, toward_promote):
    """P(the paired limits at n settle the comparison), summed exactly over
    B (scipy), C's tail given B in closed form. B and C beyond 12 standard
    deviations of their means (probability below 1e-32) are left out, which
    only lowers the sum."""
    half = delta_comparison / 2.0
    r = rate_c / (1.0 - rate_b) if rate_b < 1.0 else 0.0

    def window(count, p):
        spread = 12 * math.sqrt(count * p * (1 - p)) + 3
        return max(0, int(count * p - spread)), min(count, int(count * p + spread) + 1)

    b_lo, b_hi = window(n, rate_b)
    c_lo, c_hi = window(n - b_lo, r)
    c_lo = min(c_lo, window(n - b_hi, r)[0])
    bs = np.arange(b_lo, b_hi + 1)
    cs = np.arange(c_lo, c_hi + 1)
    pmf_b = stats.binom.pmf(bs, n, rate_b)
    rest = n - bs
    if toward_promote:
        # Settles when U(B) - L(C) <= t, i.e. C >= c_min(B).
        upper_b = cp_upper(n, bs, half)
        lower_c = cp_lower(n, cs, half)  # non-decreasing in C
        c_min = cs[0] + np.searchsorted(lower_c, upper_b - tolerance, side="left")
        # c_min past the window: counted as not settling (a lower bound).
        ok = (c_min <= cs[-1]) & (c_min <= rest)
        tail = np.where(ok, stats.binom.sf(c_min - 1, rest, r), 0.0)
    else:
        # Settles when Lo(B) - Up(C) > t, i.e. C < c_fail(B).
        lower_b = cp_lower(n, bs, half)
        upper_c = cp_upper(n, cs, half)  # non-decreasing in C
        c_fail = cs[0] + np.searchsorted(upper_c, lower_b - tolerance, side="left")
        # Every C below the window settles when the window's first does.
        ok = c_fail > cs[0]
        tail = np.where(ok, stats.binom.cdf(np.minimum(c_fail - 1, rest), rest, r), 0.0)
    return float(np.sum(pmf_b * tail))


class GatePlanProbabilityTest(unittest.TestCase):
    @classmethod
    def setUpClass(cls):
        load_stubs(ARGS.stubs)
        global gate_pb, common_pb, service_grpc
        from riskbound.v1 import common_pb2 as common_pb  # noqa: E402
        from riskbound.v1 import gate_pb2 as gate_pb  # noqa: E402
        from riskbound.v1 import riskbound_pb2_grpc as service_grpc  # noqa: E402
        cls.server = ServerProcess(ARGS.server)
        cls.channel = grpc.insecure_channel(cls.server.address)
        grpc.channel_ready_future(cls.channel).result(timeout=20)
        cls.stub = service_grpc.RiskBoundStub(cls.channel)

    @classmethod
    def tearDownClass(cls):
        cls.channel.close()
        cls.server.stop()

    def gate(self, both, only_champion, only_challenger, n, tolerance, delta, passing):
        request = gate_pb.GateRequest()
        request.policy.max_risk = 0.5  # the risk test settles: the comparison holds
        request.policy.failure_probability = delta
        request.policy.max_regression = tolerance
        request.policy.plan_pass_probability = passing
        request.candidate.id = "challenger"
        request.candidate.evidence.holdout.error_count = both + only_challenger
        request.candidate.evidence.holdout.sample_count = n
        request.champion.champion_id = "champion"
        paired = request.champion.paired
        paired.both_wrong_count = both
        paired.only_champion_wrong_count = only_champion
        paired.only_challenger_wrong_count = only_challenger
        paired.sample_count = n
        return self.stub.Gate(request, timeout=60)

    # (both wrong, only champion wrong, only challenger wrong, n, tolerance):
    # toward PROMOTE (the candidate looks better or within the tolerance) and
    # toward REJECT (it looks worse beyond it).
    CASES = [
        (10, 40, 20, 2000, 0.0),
        (5, 12, 6, 1000, 0.0),
        (30, 60, 70, 3000, 0.01),
        (10, 20, 40, 2000, 0.0),
        (3, 5, 15, 1500, 0.002),
        (0, 1, 9, 800, 0.0),
        (100, 200, 250, 20000, 0.0),  # plans of tens of thousands: blocks and grid
    ]

    def test_reported_total_settles_with_the_policy_probability(self):
        delta = 0.05
        for both, champ, chall, n, tol in self.CASES:
            totals = []
            for passing in (0.5, 0.8, 0.95):
                with self.subTest(case=(both, champ, chall, n, tol), passing=passing):
                    answer = self.gate(both, champ, chall, n, tol, delta, passing)
                    self.assertEqual(answer.verdict, gate_pb.VERDICT_HOLD, answer.reasons)
                    self.assertTrue(answer.HasField("additional_sample_count"), answer.reasons)
                    total = n + answer.additional_sample_count
                    rate_b, rate_c = chall / n, champ / n
                    toward_promote = rate_b - rate_c < tol
                    p = settle_probability(total, rate_b, rate_c, tol, delta / 4, toward_promote)
                    # Source: scipy.stats exact enumeration (module docstring).
                    self.assertGreaterEqual(p, passing, f"total {total}: probability {p}")
                    reason = [r for r in answer.reasons if "champion comparison" in r
                              and "more shared hold-out samples" in r]
                    self.assertEqual(len(reason), 1, answer.reasons)
                    self.assertIn(f"with probability at least {passing:g}", reason[0])
                    self.assertNotIn("even odds", reason[0])
                    totals.append(total)
            # A higher pass probability never asks for fewer samples, and the
            # three probabilities do not all give one count (issue 12).
            self.assertEqual(totals, sorted(totals))
            self.assertLess(totals[0], totals[2])


if __name__ == "__main__":
    run_module_tests()
