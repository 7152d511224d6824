"""Bounded-loss certificates against references computed here with Python's
decimal module at 40 significant digits from the exact input doubles
(decimal.Decimal(float) is exact): the three bounded-loss families never
report a limit on the unsafe side, stay within a few units in the last place
of the reference (the kl limits within their documented bisection
tolerance), and never report a zero penalty for a finite sample whose mean is
below loss_max, whatever the offset of the range (issue 12: [1e15,
1e15 + 0.125] gave upper = mean, penalty 0).

Sources of the references: Hoeffding (1963) Theorem 2, E[X] <= mean +
(b - a) sqrt(ln(1/delta) / (2n)); the kl-Chernoff limit on the rescaled loss
(Hoeffding 1963, proof of Theorem 1), sup{p : kl(zbar || p) <= ln(1/delta)/n},
by bisection in decimal arithmetic; Maurer & Pontil (2009) Theorem 4,
mean + (b - a) (sqrt(2 V ln(2/delta) / n) + 7 ln(2/delta) / (3 (n - 1))).

Usage: bounded_loss_offsets_test.py --server BIN --stubs DIR [unittest args]
"""
import decimal
import math
import os
import sys
import unittest
from decimal import Decimal
from fractions import Fraction

import grpc

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
from server_harness import ServerProcess, load_stubs, run_module_tests  # noqa: E402

ARGS = None
decimal.getcontext().prec = 40


def D(x):
    return Decimal(x)  # exact for a float


def kl(q, p):
    """Bernoulli kl(q || p) in decimal, 0 ln 0 = 0."""
    out = Decimal(0)
    if q > 0:
        out += q * (q / p).ln()
    if q < 1:
        out += (1 - q) * ((1 - q) / (1 - p)).ln()
    return out


def kl_upper(q, c):
    if q >= 1:
        return Decimal(1)
    lo, hi = q, Decimal(1)
    for _ in range(135):
        mid = (lo + hi) / 2
        if mid >= 1 or kl(q, mid) > c:
            hi = mid
        else:
            lo = mid
    return hi


def kl_lower(q, c):
    if q <= 0:
        return Decimal(0)
    # Arithmetic bisection to 2^-135 of q, then, when the limit lies below
    # that, geometric bisection (it may be far below any fixed step: 7e-183
    # at q = 0.001, n = 10, delta = 1e-9).
    lo, hi = Decimal(0), q
    for _ in range(135):
        mid = (lo + hi) / 2
        if mid <= 0 or kl(q, mid) > c:
            lo = mid
        else:
            hi = mid
    if lo > q * Decimal("1e-30"):
        return lo
    lo, hi = Decimal("1e-20000"), hi
    if kl(q, lo) <= c:
        return Decimal(0)
    for _ in range(300):
        mid = (lo * hi).sqrt()
        if kl(q, mid) > c:
            lo = mid
        else:
            hi = mid
    return lo


def references(family, mean, var, n, a, b, delta):
    """(upper, lower) in decimal, before clipping to [a, b]."""
    a, b, m, v, d = D(a), D(b), D(mean), D(var), D(delta)
    w = b - a
    if family == "hoeffding":
        s = ((1 / d).ln() / (2 * n)).sqrt()
        return m + w * s, m - w * s
    if family == "kl":
        z = (m - a) / w
        c = (1 / d).ln() / n
        return a + w * kl_upper(z, c), a + w * kl_lower(z, c)
    vz = min(v / (w * w), Decimal(n) / (4 * (n - 1)))
    log_term = (2 / d).ln()
    s = (2 * vz * log_term / n).sqrt() + 7 * log_term / (3 * (n - 1))
    return m + w * s, m - w * s


def ulp(x):
    return math.ulp(abs(x)) if x != 0 else math.ulp(0.0)


class BoundedLossOffsetsTest(unittest.TestCase):
    @classmethod
    def setUpClass(cls):
        load_stubs(ARGS.stubs)
        global certify_pb, common_pb, service_grpc
        from riskbound.v1 import certify_pb2 as certify_pb  # noqa: E402
        from riskbound.v1 import common_pb2 as common_pb  # noqa: E402
        from riskbound.v1 import riskbound_pb2_grpc as service_grpc  # noqa: E402
        cls.server = ServerProcess(ARGS.server)
        cls.channel = grpc.insecure_channel(cls.server.address)
        grpc.channel_ready_future(cls.channel).result(timeout=20)
        cls.stub = service_grpc.RiskBoundStub(cls.channel)
        cls.names = {
            common_pb.BOUND_FAMILY_BOUNDED_HOEFFDING: "hoeffding",
            common_pb.BOUND_FAMILY_BOUNDED_KL: "kl",
            common_pb.BOUND_FAMILY_BOUNDED_EMPIRICAL_BERNSTEIN: "bernstein",
        }

    @classmethod
    def tearDownClass(cls):
        cls.channel.close()
        cls.server.stop()

    def certify(self, mean, var, n, a, b, delta, families):
        request = certify_pb.CertifyRequest()
        loss = request.evidence.bounded_loss
        loss.mean_loss, loss.sample_variance, loss.sample_count = mean, var, n
        loss.loss_min, loss.loss_max = a, b
        request.failure_probability = delta
        request.listed.families.extend(families)
        return self.stub.Certify(request, timeout=30)

    def check(self, answer, mean, var, n, a, b):
        for cert in answer.certificates:
            family = self.names[cert.family]
            # Each certificate at the share it reports (delta split over the list).
            up_ref, low_ref = references(family, mean, var, n, a, b, cert.failure_probability)
            up_ref = min(max(up_ref, D(mean)), D(b))
            low_ref = max(min(low_ref, D(mean)), D(a))
            upper, lower = cert.risk_upper_bound, cert.risk_lower_bound
            where = f"{family} mean={mean!r} var={var!r} n={n} [{a!r}, {b!r}]"
            # Never on the unsafe side. Source: decimal references (docstring).
            self.assertGreaterEqual(D(upper), up_ref, where)
            self.assertLessEqual(D(lower), low_ref, where)
            # Close to it: a few units in the last place; for kl the bisection
            # tolerance (numeric.h: 1e-12 on the rescaled loss) and the
            # widening past the kl evaluation's error that bounded_loss.cc
            # documents: 4 eps size / c of the distance from the mean (at
            # most all of it), size = q |ln q| + (1 - q) |ln(1 - q)|.
            width = D(b) - D(a)
            if family == "kl":
                q = float((D(mean) - D(a)) / width)
                c = math.log(1 / cert.failure_probability) / n
                size = (q * abs(math.log(q)) if q > 0 else 0) + (
                    (1 - q) * abs(math.log1p(-q)) if q < 1 else 0)
                widen = D(min(1.0, 4.4 * 2.0 ** -52 * size / c) + 1e-7)
                up_tol = Decimal("2e-12") * width + widen * (up_ref - D(mean))
                low_tol = Decimal("2e-12") * width + widen * (D(mean) - low_ref)
            else:
                up_tol = low_tol = Decimal("1e-14") * width
            self.assertLessEqual(D(upper) - up_ref, up_tol + D(4 * ulp(upper)), where)
            self.assertLessEqual(low_ref - D(lower), low_tol + D(4 * ulp(lower)), where)
            # The penalty: upper - mean, rounded up (compared exactly, as
            # fractions), never 0 below loss_max.
            self.assertGreaterEqual(Fraction(cert.penalty), Fraction(upper) - Fraction(mean),
                                    where)
            if mean < b:
                self.assertGreater(cert.penalty, 0.0, where)
                self.assertGreater(upper, mean, where)

    def test_issue_example_rounds_outward_to_the_range_end(self):
        # Source: Hoeffding (1963) Thm 2 in decimal: 1e15 + 0.125 sqrt(ln 20 / 2000).
        a, b = 1e15, 1000000000000000.125
        answer = self.certify(1e15, 0.001, 1000, a, b, 0.05,
                              [common_pb.BOUND_FAMILY_BOUNDED_HOEFFDING])
        cert = answer.certificates[0]
        exact = D(a) + Decimal("0.125") * ((Decimal(20)).ln() / 2000).sqrt()
        self.assertAlmostEqual(float(exact - D(a)), 0.0048378, places=6)
        self.assertLess(D(a), exact)
        self.assertLessEqual(exact, D(cert.risk_upper_bound))
        self.assertEqual(cert.risk_upper_bound, b)  # the smallest double above it
        self.assertEqual(cert.penalty, 0.125)
        self.assertTrue(cert.vacuous)

    def test_every_family_at_every_offset(self):
        families = [common_pb.BOUND_FAMILY_BOUNDED_HOEFFDING, common_pb.BOUND_FAMILY_BOUNDED_KL,
                    common_pb.BOUND_FAMILY_BOUNDED_EMPIRICAL_BERNSTEIN]
        count = 0
        for offset in (0.0, -3.0, 1e6, 1e15, -1e15, 2.0 ** 52):
            for width in (0.125, 1.0, 1e-3, 1e9):
                a, b = offset, offset + width
                if not a < b:
                    continue
                for frac in (0.0, 0.001, 0.3, 0.999, 1.0):
                    mean = min(max(a + frac * (b - a), a), b)
                    var = 0.2 * (b - a) ** 2 * frac * (1 - frac)
                    for n in (1, 2, 10, 1000, 10 ** 6, 2 ** 40, 2 ** 53):
                        for delta in (0.05, 1e-9, 0.5):
                            listed = families if n >= 2 else families[:2]
                            answer = self.certify(mean, var, n, a, b, delta, listed)
                            self.check(answer, mean, var, n, a, b)
                            count += 1
        self.assertGreater(count, 2000)


if __name__ == "__main__":
    run_module_tests()
