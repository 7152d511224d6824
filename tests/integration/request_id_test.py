#!/usr/bin/python3
"""The request id through the real riskbound-server, on gRPC and on the HTTP
port: the caller's id (x-request-id metadata, X-Request-Id header) when it is
1 to 128 visible ASCII characters, else a fresh one of 32 lower-case hex
digits (128 random bits); sent back in the answer's initial metadata (HTTP:
response header), written in the call's log line, and copied into a Gate
answer's audit record (AuditRecord.request_id; for ScoreRegistry, every
gate record's, with the stream's id).

The server runs on 127.0.0.1:0 with --log-format json --log-level debug (the
harness's defaults), so every call adds one JSON log line.
"""
import http.client
import json
import os
import re
import sys
import time
import unittest

import grpc

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
from server_harness import ServerProcess, load_stubs, run_module_tests  # noqa: E402

ARGS = None
GENERATED = re.compile(r"^[0-9a-f]{32}$")
GATE_JSON = {"policy": {"maxRisk": 0.05, "failureProbability": 0.05},
             "candidate": {"id": "late-risk-v14",
                           "evidence": {"holdout": {"errorCount": "340", "sampleCount": "5000"}}}}


class RequestIdTest(unittest.TestCase):
    @classmethod
    def setUpClass(cls):
        load_stubs(ARGS.stubs)
        global certify_pb, gate_pb, service_grpc
        from riskbound.v1 import certify_pb2 as certify_pb  # noqa: E402
        from riskbound.v1 import gate_pb2 as gate_pb  # noqa: E402
        from riskbound.v1 import riskbound_pb2_grpc as service_grpc  # noqa: E402
        d = os.path.join(os.environ.get("TMPDIR", "/tmp"), f"riskbound-reqid-{os.getpid()}")
        os.makedirs(d, exist_ok=True)
        http_port_file = os.path.join(d, "http-port")
        cls.server = ServerProcess(ARGS.server, "--http-listen", "127.0.0.1:0",
                                   "--http-port-file", http_port_file)
        with open(http_port_file) as f:
            cls.http_port = int(f.read())
        cls.channel = grpc.insecure_channel(cls.server.address)
        cls.stub = service_grpc.RiskBoundStub(cls.channel)

    @classmethod
    def tearDownClass(cls):
        cls.channel.close()
        assert cls.server.stop() == 0

    # --- helpers ---------------------------------------------------------

    def certify_request(self):
        req = certify_pb.CertifyRequest(failure_probability=0.05)
        req.evidence.holdout.sample_count = 300
        return req

    def gate_request(self):
        req = gate_pb.GateRequest()
        req.policy.max_risk = 0.05
        req.policy.failure_probability = 0.05
        req.candidate.id = "late-risk-v14"
        req.candidate.evidence.holdout.error_count = 340
        req.candidate.evidence.holdout.sample_count = 5000
        return req

    def grpc_call(self, method, request, request_id=None):
        """Returns (answer or RpcError, the x-request-id of the initial metadata)."""
        metadata = [] if request_id is None else [("x-request-id", request_id)]
        try:
            answer, call = getattr(self.stub, method).with_call(
                request, metadata=metadata, timeout=10)
        except grpc.RpcError as err:
            return err, dict(err.initial_metadata() or ()).get("x-request-id")
        return answer, dict(call.initial_metadata() or ()).get("x-request-id")

    def http_call(self, method, payload, request_id=None):
        """Returns (HTTP status, JSON answer, X-Request-Id response header)."""
        conn = http.client.HTTPConnection("127.0.0.1", self.http_port, timeout=30)
        try:
            headers = {"Content-Type": "application/json"}
            if request_id is not None:
                headers["X-Request-Id"] = request_id
            conn.request("POST", f"/v1/{method}", body=json.dumps(payload), headers=headers)
            resp = conn.getresponse()
            return resp.status, json.loads(resp.read()), resp.getheader("X-Request-Id")
        finally:
            conn.close()

    def log_lines_with(self, request_id):
        """The server's JSON call lines carrying `request_id` (waits briefly:
        the line is written as the answer is sent)."""
        deadline = time.monotonic() + 5
        while True:
            lines = [json.loads(line) for line in self.server.logs().splitlines()
                     if line.startswith("{")]
            found = [line for line in lines
                     if line.get("message") == "call" and line.get("request_id") == request_id]
            if found or time.monotonic() > deadline:
                return found
            time.sleep(0.05)

    # --- gRPC ------------------------------------------------------------

    def test_grpc_given_id_comes_back_and_is_logged(self):
        given = "deploy-2291/step-4:certify"
        answer, echoed = self.grpc_call("Certify", self.certify_request(), given)
        self.assertEqual(echoed, given)
        # Source: Hanley & Lippman-Hand (1983), exact form 1 - 0.05^(1/300):
        # the id changes nothing in the answer.
        self.assertAlmostEqual(answer.tightest.risk_upper_bound, 1 - 0.05 ** (1 / 300),
                               places=12)
        lines = self.log_lines_with(given)
        self.assertEqual(len(lines), 1, lines)
        self.assertEqual(lines[0]["transport"], "grpc")
        self.assertEqual(lines[0]["rpc"], "Certify")
        self.assertEqual(lines[0]["code"], "OK")

    def test_grpc_generated_ids_are_128_bit_hex_and_differ(self):
        ids = [self.grpc_call("Certify", self.certify_request())[1] for _ in range(20)]
        for request_id in ids:
            self.assertRegex(request_id, GENERATED)
        self.assertEqual(len(set(ids)), len(ids))
        self.assertEqual(len(self.log_lines_with(ids[0])), 1)

    def test_grpc_unusable_ids_are_replaced(self):
        # Longer than 128 characters, or with a space (gRPC clients refuse
        # control characters in metadata values before sending them).
        for given in ("x" * 129, "two words", " leading-space"):
            _, echoed = self.grpc_call("Certify", self.certify_request(), given)
            self.assertRegex(echoed, GENERATED, repr(given))
        # Exactly 128 visible characters, punctuation included, is kept.
        longest = ("a1-_.:/=+~!" * 12)[:128]
        self.assertEqual(len(longest), 128)
        self.assertEqual(self.grpc_call("Certify", self.certify_request(), longest)[1], longest)

    def test_grpc_error_answers_carry_the_id(self):
        bad = certify_pb.CertifyRequest(failure_probability=2)
        err, echoed = self.grpc_call("Certify", bad, "bad-input-7")
        self.assertIsInstance(err, grpc.RpcError)
        self.assertEqual(err.code(), grpc.StatusCode.INVALID_ARGUMENT)
        self.assertEqual(echoed, "bad-input-7")
        lines = self.log_lines_with("bad-input-7")
        self.assertEqual([line["code"] for line in lines], ["INVALID_ARGUMENT"])
        self.assertIn("failure_probability", lines[0]["error"])

    def test_grpc_gate_audit_record_carries_the_id(self):
        answer, echoed = self.grpc_call("Gate", self.gate_request(), "release-88")
        self.assertEqual(echoed, "release-88")
        self.assertEqual(answer.audit.request_id, "release-88")
        # 340/5000 errors: the Clopper-Pearson lower bound is above 5%
        # (the demo's REJECT case).
        self.assertEqual(answer.verdict, gate_pb.VERDICT_REJECT)
        answer, echoed = self.grpc_call("Gate", self.gate_request())
        self.assertRegex(echoed, GENERATED)
        self.assertEqual(answer.audit.request_id, echoed)

    def test_grpc_id_is_not_part_of_the_request_digest(self):
        first, _ = self.grpc_call("Gate", self.gate_request(), "digest-a")
        second, _ = self.grpc_call("Gate", self.gate_request(), "digest-b")
        self.assertEqual(first.audit.request_sha256, second.audit.request_sha256)
        self.assertNotEqual(first.audit.request_id, second.audit.request_id)

    def test_grpc_registry_stream_gate_records_carry_the_stream_id(self):
        from riskbound.v1 import registry_pb2 as reg  # noqa: E402
        settings = reg.ScoreSettings(gate=gate_pb.GatePolicy(max_risk=0.05,
                                                             failure_probability=0.05))
        messages = [reg.ScoreRegistryRequest(settings=settings)]
        for record_id, errors in (("r1", 3), ("r2", 300)):
            record = reg.RegistryRecord(record_id=record_id, model_name="m", model_version="1")
            record.evidence.holdout.error_count = errors
            record.evidence.holdout.sample_count = 1000
            messages.append(reg.ScoreRegistryRequest(record=record))
        call = self.stub.ScoreRegistry(iter(messages), timeout=60,
                                       metadata=[("x-request-id", "registry-run-5")])
        answers = list(call)
        self.assertEqual(dict(call.initial_metadata())["x-request-id"], "registry-run-5")
        gated = [a.result.gated for a in answers if a.HasField("result")]
        self.assertEqual(len(gated), 2)
        self.assertEqual([g.audit.request_id for g in gated], ["registry-run-5"] * 2)
        lines = self.log_lines_with("registry-run-5")
        self.assertEqual([line["rpc"] for line in lines], ["ScoreRegistry"])

    # --- HTTP ------------------------------------------------------------

    def test_http_given_id_comes_back_logged_and_audited(self):
        status, answer, echoed = self.http_call("Gate", GATE_JSON, "pipeline-31:gate")
        self.assertEqual(status, 200)
        self.assertEqual(echoed, "pipeline-31:gate")
        self.assertEqual(answer["audit"]["requestId"], "pipeline-31:gate")
        lines = self.log_lines_with("pipeline-31:gate")
        self.assertEqual(len(lines), 1, lines)
        self.assertEqual(lines[0]["transport"], "http")
        self.assertEqual(lines[0]["rpc"], "Gate")
        self.assertEqual(lines[0]["code"], "OK")

    def test_http_generated_and_replaced_ids(self):
        status, answer, echoed = self.http_call("Gate", GATE_JSON)
        self.assertEqual(status, 200)
        self.assertRegex(echoed, GENERATED)
        self.assertEqual(answer["audit"]["requestId"], echoed)
        for given in ("y" * 129, "has space", "caf\u00e9".encode("utf-8").decode("latin-1")):
            status, answer, echoed = self.http_call("Gate", GATE_JSON, given)
            self.assertEqual(status, 200)
            self.assertRegex(echoed, GENERATED, repr(given))
            self.assertEqual(answer["audit"]["requestId"], echoed)

    def test_http_error_answers_carry_the_id(self):
        status, answer, echoed = self.http_call(
            "Certify", {"evidence": {"holdout": {"errorCount": 5, "sampleCount": 3}}},
            "bad-http-3")
        self.assertEqual(status, 400)
        self.assertEqual(answer["code"], 3)
        self.assertEqual(echoed, "bad-http-3")
        self.assertEqual([line["code"] for line in self.log_lines_with("bad-http-3")],
                         ["INVALID_ARGUMENT"])


if __name__ == "__main__":
    run_module_tests()
