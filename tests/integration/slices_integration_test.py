"""Per-slice certificates and the slice gate (issue 16) through the real
server: Certify and Gate requests with evidence.slices, checked against
values computed here.

  * every slice's limits against scipy at its share: Bonferroni (1936)
    delta_slices / G, Sidak (1967) 1 - (1 - delta_slices)^(1/G) (mpmath at
    50 digits); Clopper & Pearson (1934) limits from scipy.stats.beta;
  * the gate's ledger: one entry per slice with its slice_name; the total
    recomputed exactly (the other entries and Bonferroni slice entries
    summed as fractions.Fraction, Sidak slice entries combined as
    1 - prod(1 - s) in mpmath at 50 digits) is at most the policy's
    failure_probability, and audit.spent_failure_probability is that total
    rounded up;
  * the field paths of bad slice inputs, and an oversized slices list
    refused with one violation.

Usage: slices_integration_test.py --server BIN --stubs DIR [unittest args]
"""
import math
import os
import sys
import unittest
from fractions import Fraction

import grpc
import mpmath
from scipy import stats

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
from server_harness import ServerProcess, load_stubs, run_module_tests  # noqa: E402

ARGS = None
mpmath.mp.dps = 50

SLICES = [("north", 12, 900), ("south", 40, 500), ("coast", 3, 300), ("inland", 0, 1200),
          ("metro", 250, 20000)]


def cp_upper(n, k, delta):
    # Source: scipy.stats.beta.isf (Clopper & Pearson 1934).
    return 1.0 if k >= n else float(stats.beta.isf(delta, k + 1, n - k))


def cp_lower(n, k, delta):
    # Source: scipy.stats.beta.ppf (Clopper & Pearson 1934).
    return 0.0 if k == 0 else float(stats.beta.ppf(delta, k, n - k + 1))


def mp_root(f, guess):
    """The root of the increasing f near guess (Anderson's iteration from a
    bracket around scipy's value; mpmath at the working precision)."""
    return mpmath.findroot(f, (guess * (1 - 1e-6), guess * (1 + 1e-6)), solver="anderson")


def mp_upper(n, k, level):
    # Source: mpmath.betainc (regularized), Clopper & Pearson (1934), 40 digits.
    with mpmath.workdps(40):
        d = mpmath.mpf(level)
        return mp_root(lambda x: mpmath.betainc(k + 1, n - k, 0, x, regularized=True) - (1 - d),
                       cp_upper(n, k, float(level)))


def mp_lower(n, k, level):
    # Source: mpmath.betainc (regularized), Clopper & Pearson (1934), 40 digits.
    with mpmath.workdps(40):
        d = mpmath.mpf(level)
        return mp_root(lambda x: mpmath.betainc(k, n - k + 1, 0, x, regularized=True) - d,
                       cp_lower(n, k, float(level)))


def sidak_share(total, g):
    # Source: Sidak (1967), 1 - (1 - total)^(1/g), at 50 digits.
    return 1 - mpmath.power(1 - mpmath.mpf(total), mpmath.mpf(1) / g)


def violations_of(err):
    raw = dict(err.trailing_metadata() or ()).get("grpc-status-details-bin")
    if raw is None:
        return []
    from google.rpc import error_details_pb2, status_pb2
    status = status_pb2.Status.FromString(raw)
    out = []
    for detail in status.details:
        v = error_details_pb2.BadRequest()
        if detail.Unpack(v):
            out.extend(x.field for x in v.field_violations)
    return out


class SlicesIntegrationTest(unittest.TestCase):
    @classmethod
    def setUpClass(cls):
        load_stubs(ARGS.stubs)
        global certify_pb, common_pb, gate_pb, service_grpc
        from riskbound.v1 import certify_pb2 as certify_pb  # noqa: E402
        from riskbound.v1 import common_pb2 as common_pb  # noqa: E402
        from riskbound.v1 import gate_pb2 as gate_pb  # noqa: E402
        from riskbound.v1 import riskbound_pb2_grpc as service_grpc  # noqa: E402
        cls.server = ServerProcess(ARGS.server, log_level="warn")
        cls.channel = grpc.insecure_channel(cls.server.address)
        grpc.channel_ready_future(cls.channel).result(timeout=20)
        cls.stub = service_grpc.RiskBoundStub(cls.channel)

    @classmethod
    def tearDownClass(cls):
        cls.channel.close()
        cls.server.stop()

    # --- helpers -------------------------------------------------------

    def add_slices(self, evidence, slices):
        for name, k, n in slices:
            s = evidence.slices.add()
            s.name, s.error_count, s.sample_count = name, k, n

    def rule_value(self, rule):
        return (common_pb.SLICE_SHARE_RULE_SIDAK if rule == "sidak"
                else common_pb.SLICE_SHARE_RULE_BONFERRONI)

    def expected_share(self, rule, total, g):
        return sidak_share(total, g) if rule == "sidak" else mpmath.mpf(total) / g

    def assert_share(self, rule, share, expected):
        """The server's share is below the exact one: rounded toward zero
        (Bonferroni), or a relative 1e-9 below it on purpose (Sidak)."""
        self.assertLessEqual(mpmath.mpf(share), expected)
        slack = 1.1e-9 if rule == "sidak" else 4e-16
        self.assertGreaterEqual(mpmath.mpf(share), expected * (1 - mpmath.mpf(slack)))

    def assert_limits(self, rule, n, k, level, upper, lower):
        """Limits at `level` (the exact share's part) against scipy: within
        1e-9 relative (also at Sidak shares: the server's share is 1e-9
        lower on purpose, which moves the limits outward by less).
        Outward: upper >= scipy's and lower <= scipy's, or,
        where scipy's own value is a unit in the last place off, >= (<=) the
        limit at 40 digits (mpmath)."""
        rel = 1e-9
        want_u, want_l = cp_upper(n, k, float(level)), cp_lower(n, k, float(level))
        self.assertLessEqual(abs(upper - want_u), rel * want_u, (n, k, upper, want_u))
        self.assertLessEqual(abs(lower - want_l), rel * want_l, (n, k, lower, want_l))
        if upper < want_u:
            self.assertGreaterEqual(mpmath.mpf(upper), mp_upper(n, k, level), (n, k))
        if lower > want_l:
            self.assertLessEqual(mpmath.mpf(lower), mp_lower(n, k, level), (n, k))

    def exact_slices_total(self, rule, shares):
        """Bonferroni: the Fraction sum; Sidak: 1 - prod(1 - s) at 50 digits,
        as a Fraction of that 50-digit value rounded up."""
        if rule != "sidak":
            return sum((Fraction(s) for s in shares), Fraction(0))
        keep = mpmath.mpf(1)
        for s in shares:
            keep *= 1 - mpmath.mpf(s)
        # Nudged up past the 50-digit rounding, then converted exactly.
        man, exp = ((1 - keep) * (1 + mpmath.mpf(10) ** -45)).man_exp
        return Fraction(int(man)) * Fraction(2) ** int(exp)

    def gate(self, request):
        return self.stub.Gate(request, timeout=60)

    def invalid(self, call, request):
        with self.assertRaises(grpc.RpcError) as ctx:
            call(request, timeout=60)
        self.assertEqual(ctx.exception.code(), grpc.StatusCode.INVALID_ARGUMENT,
                         ctx.exception.details())
        return violations_of(ctx.exception)

    # --- Certify -------------------------------------------------------

    def test_certify_slices_against_scipy(self):
        for rule in ("bonferroni", "sidak"):
            for with_holdout in (False, True):
                for delta in (0.05, 0.01, 1e-5):
                    req = certify_pb.CertifyRequest(failure_probability=delta)
                    self.add_slices(req.evidence, SLICES)
                    if with_holdout:
                        req.evidence.holdout.error_count = 305
                        req.evidence.holdout.sample_count = 22900
                    req.slice_sharing.rule = self.rule_value(rule)
                    with self.subTest(rule=rule, holdout=with_holdout, delta=delta):
                        res = self.stub.Certify(req, timeout=60)
                        part = delta / 2 if with_holdout else delta
                        self.assertEqual(res.slices.failure_probability, part)
                        self.assertEqual(res.slices.rule, self.rule_value(rule))
                        share = self.expected_share(rule, part, len(SLICES))
                        counts = {name: (k, n) for name, k, n in SLICES}
                        self.assertEqual(sorted(c.slice_name for c in res.slices.slice_certificates),
                                         sorted(counts))
                        shares = []
                        for c in res.slices.slice_certificates:
                            k, n = counts[c.slice_name]
                            cert = c.certificate
                            self.assert_share(rule, cert.failure_probability, share)
                            shares.append(cert.failure_probability)
                            self.assert_limits(rule, n, k, share, cert.risk_upper_bound,
                                               cert.risk_lower_bound)
                        uppers = [c.certificate.risk_upper_bound
                                  for c in res.slices.slice_certificates]
                        self.assertEqual(uppers, sorted(uppers, reverse=True))  # worst first
                        self.assertEqual(res.slices.worst_slice_upper_bound, uppers[0])
                        exact = self.exact_slices_total(rule, shares)
                        self.assertLessEqual(exact, Fraction(part))
                        spent = Fraction(res.slices.spent_failure_probability)
                        self.assertGreaterEqual(spent, exact)
                        self.assertLessEqual(spent, Fraction(part))
                        # Everything together within the request.
                        total = spent + Fraction(res.delta_accounting.spent_failure_probability)
                        self.assertLessEqual(total, Fraction(delta))

    # --- Gate ----------------------------------------------------------

    def gate_request(self, rule, delta, slices, champion=False, limit=0.05, sequential=False):
        req = gate_pb.GateRequest()
        req.policy.max_risk = 0.05
        req.policy.failure_probability = delta
        req.policy.max_slice_risk = limit
        req.policy.sequential = sequential
        req.policy.slice_sharing.rule = self.rule_value(rule)
        req.candidate.id = "fern-9"
        k = sum(s[1] for s in slices)
        n = sum(s[2] for s in slices)
        req.candidate.evidence.holdout.error_count = k
        req.candidate.evidence.holdout.sample_count = n
        self.add_slices(req.candidate.evidence, slices)
        if champion:
            req.champion.champion_id = "fern-8"
            req.champion.paired.both_wrong_count = k // 4
            req.champion.paired.only_champion_wrong_count = k // 4
            req.champion.paired.only_challenger_wrong_count = k - k // 4
            req.champion.paired.sample_count = n
        return req

    def check_ledger(self, rule, delta, res, slices):
        names = {s[0] for s in slices}
        slice_entries = [e for e in res.delta_ledger if e.slice_name]
        other = [e for e in res.delta_ledger if not e.slice_name]
        # One entry per slice, named.
        self.assertEqual(sorted(e.slice_name for e in slice_entries), sorted(names))
        exact = sum((Fraction(e.failure_probability) for e in other), Fraction(0))
        exact += self.exact_slices_total(rule, [e.failure_probability for e in slice_entries])
        self.assertLessEqual(exact, Fraction(delta))
        spent = res.audit.spent_failure_probability
        self.assertLessEqual(Fraction(spent), Fraction(delta))
        # Rounded up: never below the exact total, and only a few units in the
        # last place above it; under Sidak the slices' combined spend is
        # raised by a relative 1e-12 before rounding (slices.h, SlicesSpent).
        self.assertGreaterEqual(Fraction(spent), exact)
        slack = 4 * math.ulp(spent)
        if rule == "sidak":
            slack += 1e-12 * float(exact)
        self.assertLessEqual(Fraction(spent) - exact, Fraction(slack), (spent, float(exact)))

    def test_gate_slices_against_scipy_and_ledger(self):
        setups = [
            # (slices, limit, expected verdict)
            ([("north", 10, 4000), ("south", 14, 3000), ("coast", 4, 2000)], 0.02,
             gate_pb.VERDICT_PROMOTE),
            ([("north", 0, 4400), ("south", 0, 4000), ("coast", 60, 600)], 0.05,
             gate_pb.VERDICT_REJECT),
            ([("north", 20, 5000), ("south", 13, 400), ("coast", 2, 3000)], 0.05,
             gate_pb.VERDICT_HOLD),
        ]
        for rule in ("bonferroni", "sidak"):
            for champion in (False, True):
                for delta in (0.05, 0.1, 1e-4):
                    for slices, limit, verdict in setups:
                        with self.subTest(rule=rule, champion=champion, delta=delta,
                                          slices=slices):
                            req = self.gate_request(rule, delta, slices, champion, limit)
                            res = self.gate(req)
                            part = delta / 3 if champion else delta / 2
                            share = self.expected_share(rule, part, len(slices))
                            counts = {name: (k, n) for name, k, n in slices}
                            self.assertEqual(len(res.slices), len(slices))
                            for s in res.slices:
                                k, n = counts[s.slice_name]
                                self.assertEqual((s.error_count, s.sample_count), (k, n))
                                self.assertEqual(s.max_risk, limit)
                                self.assert_share(rule, s.failure_probability, share)
                                self.assert_limits(rule, n, k, share / 2, s.risk_upper_bound,
                                                   s.risk_lower_bound)
                                want = (gate_pb.SLICE_OUTCOME_EXCEEDS
                                        if s.risk_lower_bound > limit
                                        else gate_pb.SLICE_OUTCOME_CLEARS
                                        if s.risk_upper_bound <= limit
                                        else gate_pb.SLICE_OUTCOME_UNDECIDED)
                                self.assertEqual(s.outcome, want, s.slice_name)
                            if delta == 0.05 and not champion:
                                self.assertEqual(res.verdict, verdict)
                            self.check_ledger(rule, delta, res, slices)

    def test_sequential_gate_ledger(self):
        slices = [("north", 10, 4000), ("south", 14, 3000), ("coast", 4, 2000)]
        for rule in ("bonferroni", "sidak"):
            res = self.gate(self.gate_request(rule, 0.05, slices, sequential=True))
            self.check_ledger(rule, 0.05, res, slices)
            for s in res.slices:
                # Anytime-valid limits are wider than Clopper-Pearson at the same level.
                self.assertGreater(s.risk_upper_bound, cp_upper(s.sample_count, s.error_count,
                                                                s.failure_probability / 2))

    # --- bad input -----------------------------------------------------

    def test_bad_slice_inputs_name_their_fields(self):
        ok = [("north", 10, 4000), ("south", 14, 3000)]
        # Duplicate names.
        req = certify_pb.CertifyRequest(failure_probability=0.05)
        self.add_slices(req.evidence, ok + [("north", 1, 10)])
        self.assertEqual(self.invalid(self.stub.Certify, req), ["evidence.slices[2].name"])
        # More errors than samples.
        req = self.gate_request("bonferroni", 0.05, ok)
        req.candidate.evidence.slices[1].error_count = 3001
        req.candidate.evidence.holdout.error_count = 10
        self.assertEqual(self.invalid(self.stub.Gate, req),
                         ["candidate.evidence.slices[1].error_count"])
        # A per-slice limit naming no slice.
        req = self.gate_request("bonferroni", 0.05, ok)
        limit = req.policy.slice_max_risks.add()
        limit.slice_name, limit.max_risk = "west", 0.1
        self.assertEqual(self.invalid(self.stub.Gate, req), ["policy.slice_max_risks[0].slice_name"])
        # Slices without a limit.
        req = self.gate_request("bonferroni", 0.05, ok)
        req.policy.ClearField("max_slice_risk")
        self.assertEqual(self.invalid(self.stub.Gate, req), ["policy.max_slice_risk"])
        # A limit without slices.
        req = self.gate_request("bonferroni", 0.05, ok)
        del req.candidate.evidence.slices[:]
        self.assertEqual(self.invalid(self.stub.Gate, req), ["candidate.evidence.slices"])
        # An enum number this server does not know.
        req = certify_pb.CertifyRequest(failure_probability=0.05)
        self.add_slices(req.evidence, ok)
        req.slice_sharing.rule = 7
        self.assertEqual(self.invalid(self.stub.Certify, req), ["slice_sharing.rule"])
        req = self.gate_request("bonferroni", 0.05, ok)
        req.policy.slice_sharing.rule = 7
        self.assertEqual(self.invalid(self.stub.Gate, req), ["policy.slice_sharing.rule"])
        # Weights with the Sidak rule.
        req = certify_pb.CertifyRequest(failure_probability=0.05)
        self.add_slices(req.evidence, ok)
        req.slice_sharing.rule = common_pb.SLICE_SHARE_RULE_SIDAK
        for name, w in (("north", 0.5), ("south", 0.5)):
            weight = req.slice_sharing.weights.add()
            weight.slice_name, weight.weight = name, w
        self.assertEqual(self.invalid(self.stub.Certify, req), ["slice_sharing.weights"])
        req = self.gate_request("sidak", 0.05, ok)
        for name, w in (("north", 0.5), ("south", 0.5)):
            weight = req.policy.slice_sharing.weights.add()
            weight.slice_name, weight.weight = name, w
        self.assertEqual(self.invalid(self.stub.Gate, req), ["policy.slice_sharing.weights"])

    def test_oversized_slices_list_is_refused_with_one_violation(self):
        many = [(f"s{i}", 1, 100) for i in range(1001)]
        req = certify_pb.CertifyRequest(failure_probability=0.05)
        self.add_slices(req.evidence, many)
        self.assertEqual(self.invalid(self.stub.Certify, req), ["evidence.slices"])
        # With a share rule too: the rule "without slices" is not reported.
        req.slice_sharing.rule = common_pb.SLICE_SHARE_RULE_SIDAK
        self.assertEqual(self.invalid(self.stub.Certify, req), ["evidence.slices"])
        req = self.gate_request("bonferroni", 0.05, many)
        self.assertEqual(self.invalid(self.stub.Gate, req), ["candidate.evidence.slices"])
        # With weights too: weights "without slices" are not reported.
        for name in ("s0", "s1"):
            weight = req.policy.slice_sharing.weights.add()
            weight.slice_name, weight.weight = name, 0.5
        self.assertEqual(self.invalid(self.stub.Gate, req), ["candidate.evidence.slices"])
        # The cap itself is accepted.
        req = certify_pb.CertifyRequest(failure_probability=0.05)
        self.add_slices(req.evidence, many[:1000])
        res = self.stub.Certify(req, timeout=60)
        self.assertEqual(len(res.slices.slice_certificates), 1000)


if __name__ == "__main__":
    run_module_tests()
