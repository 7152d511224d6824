#!/usr/bin/python3
"""Integration test: RiskBound.ScoreRegistry through the real server.

One result per record, in order; a bad record never ends the stream; the
family-wise failure-probability shares never overspend (exact rational
arithmetic); bad settings end the stream naming every bad field; a
cancelled stream leaves the server healthy; server memory stays flat over a
long stream.
"""
import os
import sys
import threading
import unittest
from fractions import Fraction

import grpc
from scipy.stats import beta

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
from server_harness import ServerProcess, load_stubs, run_module_tests, sanitized  # noqa: E402

ARGS = None


def health_serving(channel):
    check = channel.unary_unary("/grpc.health.v1.Health/Check",
                                request_serializer=lambda b: b,
                                response_deserializer=lambda b: b)
    return check(b"", timeout=10) == b"\x08\x01"


def clopper_pearson_upper(k, n, delta):
    # Source: Clopper & Pearson (1934), the one-sided exact upper limit,
    # through scipy.stats.beta.ppf (Debian's scipy).
    return 1.0 if k == n else float(beta.ppf(1.0 - delta, k + 1, n - k))


class RegistryStreamTest(unittest.TestCase):
    @classmethod
    def setUpClass(cls):
        load_stubs(ARGS.stubs)
        global reg, common, gate_pb, certify_pb, service_grpc
        from riskbound.v1 import registry_pb2 as reg  # noqa: E402
        from riskbound.v1 import common_pb2 as common  # noqa: E402
        from riskbound.v1 import gate_pb2 as gate_pb  # noqa: E402
        from riskbound.v1 import certify_pb2 as certify_pb  # noqa: E402
        from riskbound.v1 import riskbound_pb2_grpc as service_grpc  # noqa: E402
        cls.server = ServerProcess(ARGS.server, "--drain-seconds", "2")
        cls.channel = grpc.insecure_channel(cls.server.address)
        grpc.channel_ready_future(cls.channel).result(timeout=20)
        cls.stub = service_grpc.RiskBoundStub(cls.channel)

    @classmethod
    def tearDownClass(cls):
        cls.channel.close()
        cls.server.stop()

    def holdout_record(self, record_id, errors, samples, **extra):
        record = reg.RegistryRecord(record_id=record_id, model_name="m", model_version="1",
                                    **extra)
        record.evidence.holdout.error_count = errors
        record.evidence.holdout.sample_count = samples
        return reg.ScoreRegistryRequest(record=record)

    def run_stream(self, settings, items):
        messages = [reg.ScoreRegistryRequest(settings=settings)] + list(items)
        answers = list(self.stub.ScoreRegistry(iter(messages), timeout=60))
        self.assertTrue(answers[-1].HasField("summary"))
        return [a.result for a in answers[:-1]], answers[-1].summary

    def test_one_result_per_record_in_order_bad_records_do_not_end_the_stream(self):
        settings = reg.ScoreSettings(certify=reg.CertifySettings(failure_probability=0.05))
        items = [self.holdout_record("a", 3, 1000), self.holdout_record("b", 30, 10),
                 self.holdout_record("c", 0, 1500)]
        results, summary = self.run_stream(settings, items)
        self.assertEqual([r.record_id for r in results], ["a", "b", "c"])
        self.assertEqual([r.record_index for r in results], [0, 1, 2])
        self.assertEqual(results[1].WhichOneof("outcome"), "error")
        self.assertEqual(results[1].error.code, "INVALID_ARGUMENT")
        self.assertIn("evidence.holdout.error_count",
                      [v.field for v in results[1].error.field_violations])
        for r, (k, n) in ((results[0], (3, 1000)), (results[2], (0, 1500))):
            self.assertEqual(r.failure_probability, 0.05)
            upper = r.certified.tightest.risk_upper_bound
            self.assertAlmostEqual(upper, clopper_pearson_upper(k, n, 0.05), delta=1e-10)
        self.assertEqual(summary.record_count, 3)
        self.assertEqual(summary.error_count, 1)
        self.assertEqual(summary.non_vacuous_count, 2)
        self.assertEqual(summary.delta_sharing, reg.DELTA_SHARING_PER_RECORD)
        self.assertIn("on its own", summary.statement)
        self.assertTrue(summary.cautions)

    def test_shared_holdout_set_never_overspends(self):
        # Exact rational sums of the reported shares (Python fractions), for
        # K = 1..20 records on one set and several deltas.
        for delta in (0.05, 0.1, 1e-9, 0.3, 0.0123456789):
            for k in range(1, 21):
                settings = reg.ScoreSettings(
                    certify=reg.CertifySettings(failure_probability=delta),
                    delta_sharing=reg.DELTA_SHARING_PER_HOLDOUT_SET,
                    holdout_sets=[reg.HoldoutSetPlan(holdout_set_id="june", record_count=k)])
                items = [self.holdout_record(str(i), 2, 500, holdout_set_id="june")
                         for i in range(k + 1)]
                results, summary = self.run_stream(settings, items)
                shares = [Fraction(r.failure_probability) for r in results[:k]]
                self.assertLessEqual(sum(shares), Fraction(delta), (delta, k))
                for r in results[:k]:
                    self.assertEqual(r.certified.delta_accounting.requested_failure_probability,
                                     r.failure_probability)
                # The (K+1)-th record would overspend: refused, named.
                self.assertEqual(results[k].WhichOneof("outcome"), "error")
                self.assertEqual([v.field for v in results[k].error.field_violations],
                                 ["holdout_set_id"])
                spend = summary.holdout_sets[0]
                self.assertEqual(spend.scored_record_count, k)
                self.assertLessEqual(Fraction(spend.spent_failure_probability), Fraction(delta))
                self.assertGreaterEqual(Fraction(spend.spent_failure_probability), sum(shares))
                self.assertIn("hold together", summary.statement)

    def test_weights_within_a_set(self):
        settings = reg.ScoreSettings(
            certify=reg.CertifySettings(failure_probability=0.05),
            delta_sharing=reg.DELTA_SHARING_PER_HOLDOUT_SET,
            holdout_sets=[reg.HoldoutSetPlan(holdout_set_id="s", record_count=3)])
        items = [self.holdout_record("w1", 1, 400, holdout_set_id="s", delta_weight=0.5),
                 self.holdout_record("w2", 1, 400, holdout_set_id="s",
                                     delta_weight=0.5000000000000001),
                 self.holdout_record("w3", 1, 400, holdout_set_id="s", delta_weight=0.5),
                 self.holdout_record("none", 1, 400, holdout_set_id="unknown")]
        results, _ = self.run_stream(settings, items)
        self.assertEqual([r.WhichOneof("outcome") for r in results],
                         ["certified", "error", "certified", "error"])
        self.assertEqual(results[1].error.field_violations[0].field, "delta_weight")
        self.assertEqual(results[3].error.field_violations[0].field, "holdout_set_id")
        self.assertLessEqual(Fraction(results[0].failure_probability)
                             + Fraction(results[2].failure_probability), Fraction(0.05))

    def test_ledger_only_records_count_against_their_set(self):
        # A resumed run re-sends the records an earlier part scored with
        # ledger_only: they get no result, but their shares still count, so
        # the two parts together never score more than K records of a set.
        settings = reg.ScoreSettings(
            certify=reg.CertifySettings(failure_probability=0.05),
            delta_sharing=reg.DELTA_SHARING_PER_HOLDOUT_SET,
            holdout_sets=[reg.HoldoutSetPlan(holdout_set_id="s", record_count=3)])
        items = [self.holdout_record("r0", 1, 400, holdout_set_id="s", ledger_only=True),
                 self.holdout_record("r1", 1, 400, holdout_set_id="s", ledger_only=True),
                 self.holdout_record("r2", 1, 400, holdout_set_id="s"),
                 self.holdout_record("r3", 1, 400, holdout_set_id="s")]
        results, summary = self.run_stream(settings, items)
        self.assertEqual([r.record_id for r in results], ["r2", "r3"])
        self.assertEqual(results[0].holdout_set_id, "s")
        self.assertEqual(results[0].WhichOneof("outcome"), "certified")
        self.assertEqual(results[1].WhichOneof("outcome"), "error")
        self.assertEqual(summary.ledger_only_record_count, 2)
        self.assertEqual(summary.holdout_sets[0].scored_record_count, 3)
        # A ledger_only record that no longer fits ends the stream.
        too_many = [self.holdout_record(f"p{i}", 1, 400, holdout_set_id="s", ledger_only=True)
                    for i in range(4)]
        with self.assertRaises(grpc.RpcError) as ctx:
            self.run_stream(settings, too_many)
        self.assertEqual(ctx.exception.code(), grpc.StatusCode.FAILED_PRECONDITION)

    def test_gate_mode_verdicts_and_record_paths(self):
        policy = gate_pb.GatePolicy(max_risk=0.05, failure_probability=0.05)
        settings = reg.ScoreSettings(gate=policy)
        champion = gate_pb.ChampionComparison(
            champion_id="old", paired=gate_pb.PairedCounts(
                both_wrong_count=1, only_champion_wrong_count=5,
                only_challenger_wrong_count=2, sample_count=1000))
        items = [self.holdout_record("good", 3, 1000),
                 self.holdout_record("bad", 300, 1000),
                 self.holdout_record("", 3, 1000),
                 self.holdout_record("paired", 3, 1000, champion=champion),
                 self.holdout_record("few", 0, 20)]
        results, summary = self.run_stream(settings, items)
        verdicts = [r.gated.verdict if r.HasField("gated") else None for r in results]
        self.assertEqual(verdicts[0], gate_pb.VERDICT_PROMOTE)
        self.assertEqual(verdicts[1], gate_pb.VERDICT_REJECT)
        self.assertIsNone(verdicts[2])
        self.assertIn("record_id", [v.field for v in results[2].error.field_violations])
        self.assertIn(verdicts[3], (gate_pb.VERDICT_PROMOTE, gate_pb.VERDICT_HOLD))
        self.assertEqual(verdicts[4], gate_pb.VERDICT_HOLD)
        self.assertEqual(len(results[0].gated.audit.request_sha256), 64)
        self.assertEqual(summary.promote_count + summary.hold_count + summary.reject_count, 4)
        self.assertEqual(summary.error_count, 1)

    def test_bad_settings_end_the_stream_naming_every_field(self):
        settings = reg.ScoreSettings(
            gate=gate_pb.GatePolicy(max_risk=2.0, failure_probability=0.05),
            delta_sharing=reg.DELTA_SHARING_PER_HOLDOUT_SET,
            holdout_sets=[reg.HoldoutSetPlan(holdout_set_id="a", record_count=0)])
        with self.assertRaises(grpc.RpcError) as ctx:
            list(self.stub.ScoreRegistry(iter([reg.ScoreRegistryRequest(settings=settings)]),
                                         timeout=20))
        self.assertEqual(ctx.exception.code(), grpc.StatusCode.INVALID_ARGUMENT)
        from google.rpc import error_details_pb2, status_pb2
        raw = dict(ctx.exception.trailing_metadata() or ()).get("grpc-status-details-bin")
        status = status_pb2.Status.FromString(raw)
        fields = []
        for detail in status.details:
            bad = error_details_pb2.BadRequest()
            if detail.Unpack(bad):
                fields += [v.field for v in bad.field_violations]
        self.assertIn("settings.gate.max_risk", fields)
        self.assertIn("settings.holdout_sets[0].record_count", fields)

        with self.assertRaises(grpc.RpcError) as ctx:
            list(self.stub.ScoreRegistry(iter([self.holdout_record("x", 1, 10)]), timeout=20))
        self.assertEqual(ctx.exception.code(), grpc.StatusCode.INVALID_ARGUMENT)
        self.assertIn("settings", ctx.exception.details())

    def test_garbage_message_is_an_error_row(self):
        raw = self.channel.stream_stream("/riskbound.v1.RiskBound/ScoreRegistry",
                                         request_serializer=lambda b: b,
                                         response_deserializer=lambda b: b)
        settings = reg.ScoreRegistryRequest(
            settings=reg.ScoreSettings(certify=reg.CertifySettings(failure_probability=0.05)))
        good = self.holdout_record("ok", 1, 100)
        answers = list(raw(iter([settings.SerializeToString(), b"\xff\xff\xff\x07garbage",
                                 good.SerializeToString()]), timeout=20))
        results = [reg.ScoreRegistryResponse.FromString(a) for a in answers]
        self.assertEqual(results[0].result.WhichOneof("outcome"), "error")
        self.assertEqual(results[1].result.record_id, "ok")
        self.assertEqual(results[1].result.record_index, 1)
        self.assertTrue(results[2].HasField("summary"))

    def test_cancelled_stream_leaves_the_server_healthy(self):
        settings = reg.ScoreSettings(certify=reg.CertifySettings(failure_probability=0.05))
        stop = threading.Event()

        def endless():
            yield reg.ScoreRegistryRequest(settings=settings)
            i = 0
            while not stop.is_set():
                yield self.holdout_record(str(i), 1, 1000)
                i += 1

        call = self.stub.ScoreRegistry(endless(), timeout=60)
        received = 0
        for _ in call:
            received += 1
            if received == 200:
                call.cancel()
                break
        stop.set()
        self.assertEqual(received, 200)
        self.assertTrue(health_serving(self.channel))
        # And the server still scores.
        results, _ = self.run_stream(settings, [self.holdout_record("after", 0, 10)])
        self.assertEqual(results[0].WhichOneof("outcome"), "certified")

    def test_memory_flat_over_a_long_stream(self):
        if sanitized(ARGS.server):
            self.skipTest("resident memory of a sanitized server holds ASan's quarantine")
        settings = reg.ScoreSettings(certify=reg.CertifySettings(failure_probability=0.05))
        marks = {}

        def records():
            yield reg.ScoreRegistryRequest(settings=settings)
            for i in range(30000):
                if i in (5000, 29999):
                    marks[i] = self.server.proc_status("VmRSS")
                yield self.holdout_record(str(i), i % 7, 1000 + i)

        count = sum(1 for _ in self.stub.ScoreRegistry(records(), timeout=300))
        self.assertEqual(count, 30001)
        # Flat: growth between record 5,000 and 30,000 under 8 MiB (the
        # stream holds one record and one answer at a time).
        self.assertLess(marks[29999] - marks[5000], 8 * 1024, marks)


if __name__ == "__main__":
    run_module_tests()
