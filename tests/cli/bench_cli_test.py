#!/usr/bin/python3
"""Smoke test of `riskbound bench`, the load generator (a short run, never a
timed test: no figure is compared with a speed).

Against the real riskbound-server (started by harness.py): the fields of the
JSON output parse, every call is counted (OK answers plus errors equal the
calls asked for), the percentiles are ordered, and the throughput ratio is the
load's calls per second over the health check's, recomputed here from the
printed figures. `--rpc mixed` follows its documented ten-call cycle (four
certify, two gate, one each of plan, select, capacity, families).

Against a stand-in server written with Debian's grpcio (an implementation
outside the project) that refuses a known share of the Certify calls with
RESOURCE_EXHAUSTED: the bench counts exactly the refusals the stand-in made,
prints them by status code and exits 9.

Exit codes under test (riskbound bench --help): 0 every call OK, 9 calls
failed during the run, 2 usage, 3 a request refused or unreadable, 4 server
unreachable.
"""
import json
import os
import tempfile
import threading
import unittest
from concurrent import futures

import grpc

import harness

EXAMPLES = os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", "..", "examples",
                        "fernhill")


def bench(*args, **kwargs):
    return harness.run_cli("bench", *args, timeout=120, **kwargs)


class RealServerTest(unittest.TestCase):
    def check_row(self, row, calls):
        self.assertEqual(row["ok_count"], calls)
        self.assertEqual(row["error_count"], 0)
        self.assertEqual(row["error_counts"], {})
        self.assertGreater(row["calls_per_second"], 0)
        self.assertGreater(row["p50_us"], 0)
        self.assertLessEqual(row["p50_us"], row["p90_us"])
        self.assertLessEqual(row["p90_us"], row["p99_us"])
        self.assertLessEqual(row["p99_us"], row["max_us"])

    def test_json_fields_and_ratio(self):
        code, out, err = bench("--requests", "200", "--concurrency", "4", "--channels", "2",
                               "--output", "json")
        self.assertEqual(code, 0, err)
        report = json.loads(out)
        self.assertEqual(report["rpc"], "certify")
        self.assertEqual(report["concurrency"], 4)
        self.assertEqual(report["channels"], 2)
        self.assertEqual(report["rounds"], 2)
        self.assertEqual(report["baseline"]["rpc"], "health")
        self.check_row(report["baseline"], 200)
        self.check_row(report["load"], 200)
        self.assertEqual(report["error_count"], 0)
        # The ratio of the two printed throughputs (one decimal each), to the
        # printed three decimals.
        ratio = report["load"]["calls_per_second"] / report["baseline"]["calls_per_second"]
        self.assertAlmostEqual(report["throughput_ratio"], ratio, delta=0.002 + 1e-3 * ratio)
        # Calls per second agree with the calls and the phases' wall time.
        self.assertAlmostEqual(report["load"]["calls_per_second"],
                               200 / report["load_seconds"],
                               delta=0.02 * report["load"]["calls_per_second"] + 1)

    def test_table_names_both_rows_and_the_ratio(self):
        code, out, err = bench("--rpc", "capacity", "--requests", "100", "--rounds", "1")
        self.assertEqual(code, 0, err)
        lines = out.splitlines()
        self.assertIn("riskbound bench: capacity against " + harness.ADDRESS, lines[0])
        self.assertIn("examples/fernhill/requests/late-risk-net-capacity.json", lines[1])
        header = next(i for i, l in enumerate(lines) if l.startswith("rpc "))
        self.assertEqual(lines[header].split(),
                         ["rpc", "ok", "errors", "calls/s", "p50_us", "p90_us", "p99_us", "max_us"])
        health_row = lines[header + 1].split()
        load_row = lines[header + 2].split()
        self.assertEqual(health_row[:3], ["health", "100", "0"])
        self.assertEqual(load_row[:3], ["capacity", "100", "0"])
        ratio_line = next(l for l in lines if l.startswith("throughput ratio capacity/health: "))
        ratio = float(ratio_line.split(": ")[1])
        self.assertAlmostEqual(ratio, float(load_row[3]) / float(health_row[3]), delta=0.002)
        self.assertIn("errors by code: none", lines)

    def test_mixed_follows_its_cycle(self):
        code, out, err = bench("--rpc", "mixed", "--requests", "200", "--concurrency", "8",
                               "--output", "json")
        self.assertEqual(code, 0, err)
        report = json.loads(out)
        self.check_row(report["load"], 200)
        # 200 calls in two phases of 100: ten cycles of ten calls each.
        counts = {row["rpc"]: row["ok_count"] for row in report["mix"]}
        self.assertEqual(counts, {"certify": 80, "gate": 40, "plan": 20, "select": 20,
                                  "capacity": 20, "families": 20})

    def test_payload_file(self):
        code, out, err = bench("--payload", os.path.join(EXAMPLES, "models", "late-risk-v12.json"),
                               "--requests", "50", "--output", "json")
        self.assertEqual(code, 0, err)
        self.check_row(json.loads(out)["load"], 50)

    def test_duration(self):
        code, out, err = bench("--rpc", "families", "--duration", "0.4", "--output", "json")
        self.assertEqual(code, 0, err)
        report = json.loads(out)
        self.assertGreater(report["load"]["ok_count"], 0)
        # Two phases of 0.2 s each; the last calls may end a little after.
        self.assertGreaterEqual(report["load_seconds"], 0.39)

    def test_refused_payload_exit_3(self):
        with tempfile.NamedTemporaryFile("w", suffix=".json", delete=False) as f:
            json.dump({"evidence": {"holdout": {"errorCount": "5", "sampleCount": "3"}}}, f)
        try:
            code, out, err = bench("--payload", f.name, "--requests", "20")
        finally:
            os.unlink(f.name)
        self.assertEqual(code, 3)
        self.assertEqual(out, "")
        self.assertIn("the first certify call failed, nothing was measured", err)
        self.assertIn("evidence.holdout.error_count", err)
        # A file that is not the RPC's request (a GatePolicy for Gate): its
        # first unknown field named before anything is sent.
        code, out, err = bench("--rpc", "gate", "--payload",
                               os.path.join(EXAMPLES, "gate", "policy.json"))
        self.assertEqual(code, 3)
        self.assertEqual(out, "")
        self.assertIn("not a valid riskbound.v1.GateRequest", err)
        self.assertIn("Cannot find field", err)

    def test_unreachable_exit_4(self):
        port = harness.free_port_nobody_listens_on()
        code, out, err = bench("--server", f"127.0.0.1:{port}", "--timeout", "2",
                               "--requests", "10")
        self.assertEqual(code, 4)
        self.assertEqual(out, "")
        self.assertIn(f"cannot reach the server at 127.0.0.1:{port}", err)

    def test_usage_exit_2(self):
        cases = {
            ("--concurrency", "0"): "--concurrency: must be from 1 to 10000",
            ("--concurrency", "x"): "--concurrency",
            ("--rpc", "nosuch"): ("--rpc: unknown RPC 'nosuch'; one of certify, gate, plan, "
                                  "select, capacity, families, effective-vc, health, mixed"),
            ("--channels", "5", "--concurrency", "4"): "--channels (5) must be at most",
            ("--requests", "10", "--duration", "1"): "--requests and --duration: choose one",
            ("--duration", "-1"): "--duration: must be > 0",
            ("--rpc", "mixed", "--payload", "x.json"): "--payload goes with one RPC",
            ("--rpc", "health", "--payload", "x.json"): "--payload goes with one RPC",
            ("--requests", "1", "--rounds", "2"): "--requests (1) must be at least --rounds",
            ("--bogus",): "bogus",
            ("--output", "yaml"): "--output must be table or json",
        }
        for args, message in cases.items():
            code, out, err = bench(*args)
            self.assertEqual(code, 2, (args, out, err))
            self.assertEqual(out, "", args)
            self.assertIn(message, err, args)
            self.assertIn("see riskbound bench --help", err, args)

    def test_help_lists_options_and_payloads(self):
        code, out, err = bench("--help", server=False)
        self.assertEqual(code, 0, err)
        for flag in ("--concurrency", "--channels", "--requests", "--duration", "--rounds",
                     "--payload", "--rpc", "--output", "--server", "--auth-token-file"):
            self.assertIn(flag, out)
        for path in ("examples/fernhill/requests/late-risk-v12-recommended.json",
                     "examples/fernhill/requests/damage-screen-v8-gate.json",
                     "examples/fernhill/requests/late-risk-plan-holdout.json"):
            self.assertIn(path, out)
            self.assertTrue(os.path.exists(os.path.join(EXAMPLES, "..", "..", path)), path)


class StandIn:
    """A grpcio server answering the health check and Certify (empty, valid
    messages), refusing every `refuse_every`-th Certify call after the first
    with RESOURCE_EXHAUSTED, and counting what it did."""

    def __init__(self, refuse_every):
        self.refuse_every = refuse_every
        self.lock = threading.Lock()
        self.certify_calls = 0
        self.refused = 0
        self.health_calls = 0
        handlers = (
            grpc.method_handlers_generic_handler("grpc.health.v1.Health", {
                "Check": grpc.unary_unary_rpc_method_handler(self.check)}),
            grpc.method_handlers_generic_handler("riskbound.v1.RiskBound", {
                "Certify": grpc.unary_unary_rpc_method_handler(self.certify)}),
        )
        self.server = grpc.server(futures.ThreadPoolExecutor(max_workers=4))
        self.server.add_generic_rpc_handlers(handlers)
        self.port = self.server.add_insecure_port("127.0.0.1:0")
        self.server.start()
        self.address = f"127.0.0.1:{self.port}"

    def check(self, request, context):
        with self.lock:
            self.health_calls += 1
        return b"\x08\x01"  # SERVING

    def certify(self, request, context):
        with self.lock:
            self.certify_calls += 1
            refuse = self.certify_calls > 1 and self.certify_calls % self.refuse_every == 0
            if refuse:
                self.refused += 1
        if refuse:
            context.abort(grpc.StatusCode.RESOURCE_EXHAUSTED, "stand-in: busy")
        return b""

    def stop(self):
        self.server.stop(grace=None).wait(10)


class FailedCallsTest(unittest.TestCase):
    def test_every_error_is_counted_exit_9(self):
        stand_in = StandIn(refuse_every=7)
        try:
            code, out, err = bench("--server", stand_in.address, "--requests", "140",
                                   "--concurrency", "4", "--output", "json")
        finally:
            stand_in.stop()
        self.assertEqual(code, 9, err)
        report = json.loads(out)
        # One preflight Certify call, then 140 measured ones.
        self.assertEqual(stand_in.certify_calls, 141)
        self.assertEqual(stand_in.health_calls, 141)
        self.assertEqual(report["load"]["error_counts"], {"RESOURCE_EXHAUSTED": stand_in.refused})
        self.assertEqual(report["load"]["error_count"], stand_in.refused)
        self.assertEqual(report["load"]["ok_count"] + stand_in.refused, 140)
        self.assertEqual(report["error_count"], stand_in.refused)
        self.assertIn(f"{stand_in.refused} of 280 calls failed", err)

    def test_table_prints_errors_by_code(self):
        stand_in = StandIn(refuse_every=5)
        try:
            code, out, err = bench("--server", stand_in.address, "--requests", "50",
                                   "--concurrency", "2", "--rounds", "1")
        finally:
            stand_in.stop()
        self.assertEqual(code, 9, err)
        self.assertIn(f"errors by code: certify RESOURCE_EXHAUSTED {stand_in.refused}", out)


if __name__ == "__main__":
    harness.main()
