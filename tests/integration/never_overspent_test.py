"""delta is never overspent, not even by rounding (issue 12), through the real
server: for K = 1..13 certify families, K = 1..20 select candidates (uniform,
6/(pi^2 k^2) and caller weights) and the gate's ledger, over a few hundred
failure probabilities, the exact rational sum of the shares an answer
reports is at most the failure probability requested, and the spent failure
probability it reports is at most the request and at least that exact sum.
Caller weights whose exact sum exceeds 1 are refused naming the field.

Source: exact rational arithmetic, Python's fractions.Fraction (a double
converts to a Fraction exactly); pi for the 6/(pi^2 k^2) weights from
Machin's formula (1706), pi = 16 atan(1/5) - 4 atan(1/239), summed in
fractions with the alternating series' error bound.

Usage: never_overspent_test.py --server BIN --stubs DIR [unittest args]
"""
import math
import os
import random
import sys
import unittest
from fractions import Fraction

import grpc

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
from server_harness import ServerProcess, load_stubs, run_module_tests  # noqa: E402

ARGS = None


def deltas():
    """A few hundred failure probabilities: a log grid, values people type,
    their neighbouring doubles, and random ones."""
    out = [0.99 * 10.0 ** (-12 + 12 * i / 60) for i in range(61)]
    for d in (0.05, 0.1, 0.01, 1e-9, 0.3, 0.2, 0.07, 1 / 3, 0.5, 0.9, 2 / 7, 1e-6, 0.025):
        out += [d, math.nextafter(d, 0), math.nextafter(d, 1)]
    rng = random.Random(20261202)
    out += [0.999 * 10.0 ** (-15 * rng.random()) for _ in range(200)]
    return out


def atan_inverse(x, terms):
    """atan(1/x) as a Fraction interval [lo, hi] from its alternating series."""
    s, sign = Fraction(0), 1
    for k in range(terms):
        s += sign * Fraction(1, (2 * k + 1) * x ** (2 * k + 1))
        sign = -sign
    bound = Fraction(1, (2 * terms + 1) * x ** (2 * terms + 1))
    return s - bound, s + bound


def pi_interval():
    a_lo, a_hi = atan_inverse(5, 40)
    b_lo, b_hi = atan_inverse(239, 15)
    return 16 * a_lo - 4 * b_hi, 16 * a_hi - 4 * b_lo


PI_LO, PI_HI = pi_interval()


class NeverOverspentTest(unittest.TestCase):
    @classmethod
    def setUpClass(cls):
        load_stubs(ARGS.stubs)
        global pb, common_pb, select_pb, gate_pb, service_grpc
        from riskbound.v1 import certify_pb2 as pb  # noqa: E402
        from riskbound.v1 import common_pb2 as common_pb  # noqa: E402
        from riskbound.v1 import gate_pb2 as gate_pb  # noqa: E402
        from riskbound.v1 import riskbound_pb2_grpc as service_grpc  # noqa: E402
        from riskbound.v1 import select_pb2 as select_pb  # noqa: E402
        cls.server = ServerProcess(ARGS.server, log_level="warn")
        cls.channel = grpc.insecure_channel(cls.server.address)
        grpc.channel_ready_future(cls.channel).result(timeout=20)
        cls.stub = service_grpc.RiskBoundStub(cls.channel)

    @classmethod
    def tearDownClass(cls):
        cls.channel.close()
        cls.server.stop()

    def assert_not_overspent(self, shares, spent, delta, where):
        exact = sum(Fraction(s) for s in shares)
        # Source: fractions.Fraction, exact.
        self.assertLessEqual(exact, Fraction(delta), where)
        self.assertLessEqual(Fraction(spent), Fraction(delta), where)
        self.assertGreaterEqual(Fraction(spent), exact, where)
        for s in shares:
            self.assertGreater(s, 0.0, where)

    def every_kind(self, request):
        e = request.evidence
        e.holdout.error_count, e.holdout.sample_count = 12, 4000
        e.training.error_count, e.training.sample_count = 30, 5000
        e.training.capacity.vc_dimension = 10
        b = e.bounded_loss
        b.mean_loss, b.sample_variance, b.sample_count, b.loss_min, b.loss_max = (
            0.3, 0.04, 800, 0.0, 2.0)
        p = e.pac_bayes
        p.kl_divergence, p.gibbs_empirical_risk, p.sample_count = 5.0, 0.03, 10000
        p.target = common_pb.PAC_BAYES_TARGET_GIBBS
        r = e.rademacher
        r.error_count, r.sample_count, r.empirical_rademacher = 40, 2000, 0.05
        c = e.compression
        c.sample_count, c.compression_size, c.size_fixed_in_advance = 10000, 30, True

    def test_certify_listed_families_and_all(self):
        probe = pb.CertifyRequest()
        self.every_kind(probe)
        probe.failure_probability = 0.05
        probe.all_applicable.SetInParent()
        families = [c.family for c in self.stub.Certify(probe, timeout=30).certificates]
        self.assertGreaterEqual(len(families), 12)
        for delta in deltas():
            for k in range(1, len(families) + 1):
                request = pb.CertifyRequest()
                self.every_kind(request)
                request.failure_probability = delta
                request.listed.families.extend(families[:k])
                answer = self.stub.Certify(request, timeout=30)
                self.assert_not_overspent(
                    [c.failure_probability for c in answer.certificates],
                    answer.delta_accounting.spent_failure_probability, delta, f"{delta!r} K={k}")
            probe.failure_probability = delta
            answer = self.stub.Certify(probe, timeout=30)
            self.assert_not_overspent([c.failure_probability for c in answer.certificates],
                                      answer.delta_accounting.spent_failure_probability, delta,
                                      f"all at {delta!r}")

    def test_certify_weights_summed_exactly(self):
        request = pb.CertifyRequest()
        self.every_kind(request)
        request.failure_probability = 0.05
        request.listed.families.extend([common_pb.BOUND_FAMILY_HOLDOUT_EXACT_BINOMIAL,
                                        common_pb.BOUND_FAMILY_HOLDOUT_KL_CHERNOFF])
        for weights, accepted in (([0.5, 0.5000000000000001], False), ([0.2, 0.8], False),
                                  ([0.25, 0.75], True), ([0.3, 0.7], True)):
            # Source: Fraction(0.2) + Fraction(0.8) > 1, Fraction(0.3) + Fraction(0.7) < 1.
            self.assertEqual(sum(Fraction(w) for w in weights) <= 1, accepted)
            del request.listed.delta_weights[:]
            request.listed.delta_weights.extend(weights)
            if accepted:
                answer = self.stub.Certify(request, timeout=30)
                self.assert_not_overspent(
                    [c.failure_probability for c in answer.certificates],
                    answer.delta_accounting.spent_failure_probability, 0.05, str(weights))
                continue
            with self.assertRaises(grpc.RpcError) as caught:
                self.stub.Certify(request, timeout=30)
            self.assertEqual(caught.exception.code(), grpc.StatusCode.INVALID_ARGUMENT)
            self.assertIn("listed.delta_weights", caught.exception.details())

    def select_request(self, k, delta, spread, weights=()):
        request = select_pb.SelectStructureRequest()
        for i in range(k):
            c = request.structure.add()
            c.id, c.error_count, c.sample_count = f"c{i}", 100 - i, 10000
            c.capacity.vc_dimension = 1 + i
        request.family = common_pb.BOUND_FAMILY_VC_ADDITIVE
        request.failure_probability = delta
        request.delta_spread = spread
        request.weights.extend(weights)
        return request

    def test_select_every_spread(self):
        for delta in deltas():
            for k in range(1, 21):
                for spread in (select_pb.DELTA_SPREAD_UNIFORM, select_pb.DELTA_SPREAD_INVERSE_SQUARE):
                    answer = self.stub.SelectStructure(self.select_request(k, delta, spread),
                                                       timeout=30)
                    rows = answer.candidates
                    where = f"{delta!r} K={k} spread={spread}"
                    self.assert_not_overspent([r.failure_probability for r in rows],
                                              answer.spent_failure_probability, delta, where)
                    self.assertLessEqual(sum(Fraction(r.delta_weight) for r in rows), 1, where)
                    if spread == select_pb.DELTA_SPREAD_INVERSE_SQUARE:
                        for position, r in enumerate(rows, start=1):
                            # w_k <= 6 / (pi^2 k^2) with pi >= PI_LO (Machin).
                            bound = Fraction(6, position * position) / (PI_LO * PI_LO)
                            self.assertLessEqual(Fraction(r.delta_weight), bound, where)
                            self.assertLessEqual(Fraction(r.failure_probability),
                                                 Fraction(delta) * Fraction(r.delta_weight))
                    else:
                        for r in rows:
                            self.assertLessEqual(Fraction(r.failure_probability) * k,
                                                 Fraction(delta), where)
                # Caller weights 1/(k+1), the last twice that: a decimal sum
                # of 1 that the doubles may exceed.
                weights = [1 / (k + 1)] * k
                weights[-1] = 2 / (k + 1)
                request = self.select_request(k, delta, select_pb.DELTA_SPREAD_CALLER_WEIGHTS,
                                              weights)
                if sum(Fraction(w) for w in weights) > 1:
                    with self.assertRaises(grpc.RpcError) as caught:
                        self.stub.SelectStructure(request, timeout=30)
                    self.assertEqual(caught.exception.code(), grpc.StatusCode.INVALID_ARGUMENT)
                    self.assertIn("weights", caught.exception.details())
                    continue
                answer = self.stub.SelectStructure(request, timeout=30)
                self.assert_not_overspent([r.failure_probability for r in answer.candidates],
                                          answer.spent_failure_probability, delta,
                                          f"{delta!r} K={k} caller weights")

    def test_issue_examples(self):
        # select, uniform over 10 at 0.05: once 0.05000000000000002.
        answer = self.stub.SelectStructure(
            self.select_request(10, 0.05, select_pb.DELTA_SPREAD_UNIFORM), timeout=30)
        self.assertLessEqual(Fraction(answer.spent_failure_probability), Fraction(0.05))
        # select, caller weights [0.5, 0.5000000000000001]: once accepted.
        with self.assertRaises(grpc.RpcError) as caught:
            self.stub.SelectStructure(self.select_request(
                2, 0.05, select_pb.DELTA_SPREAD_CALLER_WEIGHTS, [0.5, 0.5000000000000001]),
                timeout=30)
        self.assertEqual(caught.exception.code(), grpc.StatusCode.INVALID_ARGUMENT)
        self.assertIn("weights", caught.exception.details())

    def test_gate_ledger(self):
        families = [common_pb.BOUND_FAMILY_HOLDOUT_EXACT_BINOMIAL,
                    common_pb.BOUND_FAMILY_HOLDOUT_KL_CHERNOFF,
                    common_pb.BOUND_FAMILY_HOLDOUT_HOEFFDING]
        for delta in deltas()[::3]:
            if delta < 1e-300:
                continue
            for k in (1, 2, 3):
                for with_champion in (False, True):
                    request = gate_pb.GateRequest()
                    request.policy.max_risk = 0.05
                    request.policy.max_regression = 0.02
                    request.policy.failure_probability = delta
                    request.policy.allowed_families.extend(families[:k])
                    request.candidate.id = "m"
                    request.candidate.evidence.holdout.error_count = 12
                    request.candidate.evidence.holdout.sample_count = 4000
                    if with_champion:
                        request.champion.champion_id = "c"
                        p = request.champion.paired
                        p.both_wrong_count, p.only_champion_wrong_count = 8, 6
                        p.only_challenger_wrong_count, p.sample_count = 4, 4000
                    answer = self.stub.Gate(request, timeout=30)
                    self.assert_not_overspent(
                        [s.failure_probability for s in answer.delta_ledger],
                        answer.audit.spent_failure_probability, delta,
                        f"gate {delta!r} K={k} champion={with_champion}")


if __name__ == "__main__":
    run_module_tests()
