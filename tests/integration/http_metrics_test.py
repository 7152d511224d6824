#!/usr/bin/python3
"""The HTTP port of the real riskbound-server: Prometheus metrics and the
methods as POST /v1/<Method> with the protobuf JSON mapping.

A real HTTP client (Python's http.client) talks to a server started on
127.0.0.1:0 (--http-listen 127.0.0.1:0, port read back from
--http-port-file). The metrics are parsed by a strict parser of the text
exposition format written here (the format is an open standard: Prometheus
"Exposition formats", text format 0.0.4), since Debian's Python has no
Prometheus client library.
"""
import concurrent.futures
import http.client
import json
import math
import os
import re
import sys
import time
import unittest

import grpc

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
from server_harness import ServerProcess, load_stubs, run_module_tests  # noqa: E402

ARGS = None

METRIC_NAME = r"[a-zA-Z_:][a-zA-Z0-9_:]*"
LABEL = r'([a-zA-Z_][a-zA-Z0-9_]*)="((?:[^"\\\n]|\\\\|\\"|\\n)*)"'
SAMPLE = re.compile(rf"^({METRIC_NAME})(?:\{{((?:{LABEL})(?:,{LABEL})*)\}})? (\S+)$")


def parse_exposition(text):
    """Parses the text format strictly: every line is a HELP or TYPE comment
    or a sample; each sample's family has a TYPE before it; values are
    floats. Returns ({family: type}, [(name, {label: value}, value)])."""
    types, samples = {}, []
    assert text.endswith("\n"), "the exposition ends with a newline"
    for line in text[:-1].split("\n"):
        if line.startswith("# HELP "):
            assert re.match(rf"^# HELP {METRIC_NAME} .+$", line), line
            continue
        if line.startswith("# TYPE "):
            m = re.match(rf"^# TYPE ({METRIC_NAME}) (counter|gauge|histogram|summary|untyped)$",
                         line)
            assert m, line
            assert m.group(1) not in types, "one TYPE per family: " + line
            types[m.group(1)] = m.group(2)
            continue
        m = SAMPLE.match(line)
        assert m, "not a sample line: " + repr(line)
        name, labels_text, value = m.group(1), m.group(2), m.group(m.lastindex)
        labels = dict(re.findall(LABEL, labels_text or ""))
        family = re.sub(r"_(bucket|sum|count)$", "", name) if name not in types else name
        assert family in types, "sample before its TYPE: " + line
        samples.append((name, labels, float(value)))
    return types, samples


def value_of(samples, metric, **labels):
    found = [v for n, l, v in samples if n == metric and l == labels]
    return found[0] if found else 0.0


class HttpTest(unittest.TestCase):
    @classmethod
    def setUpClass(cls):
        load_stubs(ARGS.stubs)
        global certify_pb, gate_pb, service_grpc
        from riskbound.v1 import certify_pb2 as certify_pb  # noqa: E402
        from riskbound.v1 import gate_pb2 as gate_pb  # noqa: E402
        from riskbound.v1 import riskbound_pb2_grpc as service_grpc  # noqa: E402
        d = os.path.join(os.environ.get("TMPDIR", "/tmp"), f"riskbound-http-{os.getpid()}")
        os.makedirs(d, exist_ok=True)
        cls.http_port_file = os.path.join(d, "http-port")
        cls.server = ServerProcess(ARGS.server, "--http-listen", "127.0.0.1:0",
                                   "--http-port-file", cls.http_port_file,
                                   "--max-request-bytes", "65536")
        with open(cls.http_port_file) as f:
            cls.http_port = int(f.read())
        cls.channel = grpc.insecure_channel(cls.server.address)
        cls.stub = service_grpc.RiskBoundStub(cls.channel)

    @classmethod
    def tearDownClass(cls):
        cls.channel.close()
        assert cls.server.stop() == 0

    def request(self, method, path, body=None):
        conn = http.client.HTTPConnection("127.0.0.1", self.http_port, timeout=30)
        try:
            headers = {"Content-Type": "application/json"} if body is not None else {}
            conn.request(method, path, body=body, headers=headers)
            resp = conn.getresponse()
            return resp.status, resp.getheader("Content-Type"), resp.read().decode()
        finally:
            conn.close()

    def post(self, method, payload):
        status, ctype, body = self.request("POST", f"/v1/{method}", json.dumps(payload))
        self.assertEqual(ctype, "application/json")
        return status, json.loads(body)

    def test_certify_matches_grpc(self):
        # Source: Hanley & Lippman-Hand (1983) rule of three, exact form
        # 1 - 0.05^(1/300) = 0.009936 (as in the gRPC integration test).
        payload = {"evidence": {"holdout": {"errorCount": "0", "sampleCount": "300"}},
                   "failureProbability": 0.05}
        status, answer = self.post("Certify", payload)
        self.assertEqual(status, 200)
        upper = answer["tightest"]["riskUpperBound"]
        self.assertAlmostEqual(upper, 1 - 0.05 ** (1 / 300), places=12)
        req = certify_pb.CertifyRequest(failure_probability=0.05)
        req.evidence.holdout.sample_count = 300
        self.assertEqual(self.stub.Certify(req, timeout=10).tightest.risk_upper_bound, upper)

    def test_gate_in_json(self):
        payload = {"policy": {"maxRisk": 0.05, "failureProbability": 0.05},
                   "candidate": {"id": "late-risk-v14",
                                 "evidence": {"holdout": {"errorCount": 340,
                                                          "sampleCount": 5000}}}}
        status, answer = self.post("Gate", payload)
        self.assertEqual(status, 200)
        # 340/5000 = 6.8% errors: the Clopper-Pearson lower bound is above 5%
        # (the demo's REJECT case), so the verdict is REJECT.
        self.assertEqual(answer["verdict"], "VERDICT_REJECT")

    def test_two_bad_fields_give_400_with_both_named(self):
        payload = {"evidence": {"holdout": {"errorCount": 5, "sampleCount": 3}},
                   "failureProbability": 2}
        status, answer = self.post("Certify", payload)
        # HTTP 400 for INVALID_ARGUMENT: the mapping of google.rpc.Code's
        # documentation (common practice for gRPC-to-HTTP gateways).
        self.assertEqual(status, 400)
        self.assertEqual(answer["code"], 3)  # INVALID_ARGUMENT
        self.assertIn("failure_probability", answer["message"])
        self.assertIn("evidence.holdout.error_count", answer["message"])
        by_type = {d["@type"]: d for d in answer["details"]}
        self.assertEqual(sorted(by_type), ["type.googleapis.com/google.rpc.BadRequest",
                                           "type.googleapis.com/google.rpc.ErrorInfo"])
        violations = by_type["type.googleapis.com/google.rpc.BadRequest"]["fieldViolations"]
        self.assertEqual([v["field"] for v in violations],
                         ["failure_probability", "evidence.holdout.error_count"])
        self.assertIn("strictly between 0 and 1", violations[0]["description"])
        self.assertIn("5 errors exceed the 3 samples", violations[1]["description"])
        info = by_type["type.googleapis.com/google.rpc.ErrorInfo"]
        self.assertEqual((info["reason"], info["domain"]), ("INVALID_FIELDS", "riskbound.v1"))
        self.assertEqual(info["metadata"]["violation_count"], "2")
        # The body is the google.rpc.Status a gRPC client gets in the
        # grpc-status-details-bin trailer for the same request, in the
        # protobuf JSON mapping (parsed back with protobuf's json_format).
        from google.protobuf import json_format
        from google.rpc import error_details_pb2, status_pb2
        req = certify_pb.CertifyRequest(failure_probability=2)
        req.evidence.holdout.error_count = 5
        req.evidence.holdout.sample_count = 3
        with self.assertRaises(grpc.RpcError) as ctx:
            self.stub.Certify(req, timeout=10)
        raw = dict(ctx.exception.trailing_metadata() or ()).get("grpc-status-details-bin")
        over_grpc = status_pb2.Status.FromString(raw)
        over_http = json_format.Parse(json.dumps(answer), status_pb2.Status())
        self.assertEqual((over_http.code, over_http.message), (over_grpc.code, over_grpc.message))

        def unpacked(status):
            out = []
            for detail in status.details:
                for kind in (error_details_pb2.BadRequest, error_details_pb2.ErrorInfo):
                    if detail.Is(kind.DESCRIPTOR):
                        message = kind()
                        detail.Unpack(message)
                        out.append(message)
            return out

        self.assertEqual(unpacked(over_http), unpacked(over_grpc))
        self.assertEqual(len(unpacked(over_http)), 2)

    def test_every_method_in_json_matches_grpc(self):
        # Each of the six methods, POSTed in the protobuf JSON mapping, gives
        # the answer the gRPC method gives for the same request (the Gate
        # audit record's timestamp and request id aside).
        from google.protobuf import json_format
        from riskbound.v1 import capacity_pb2, families_pb2, plan_pb2, select_pb2
        source = os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", "..")

        def example(path):
            with open(os.path.join(source, "examples", "fernhill", path)) as f:
                return json.load(f)

        with open(os.path.join(source, "examples", "fernhill", "gate", "policy.json")) as f:
            policy = json.load(f)
        cases = [
            ("Certify", certify_pb.CertifyRequest, certify_pb.CertifyResponse,
             example("models/address-normalizer-v3.json")),
            ("EstimateCapacity", capacity_pb2.EstimateCapacityRequest,
             capacity_pb2.EstimateCapacityResponse,
             example("requests/late-risk-net-capacity.json")),
            ("Gate", gate_pb.GateRequest, gate_pb.GateResponse,
             {"policy": policy, "candidate": example("gate/late-risk-v14.candidate.json")}),
            ("SelectStructure", select_pb2.SelectStructureRequest,
             select_pb2.SelectStructureResponse, example("structure.json")),
            ("PlanSamples", plan_pb2.PlanSamplesRequest, plan_pb2.PlanSamplesResponse,
             {"holdout": {"targetRisk": 0.05, "expectedRisk": 0.0,
                          "failureProbability": 0.05}}),
            ("ListFamilies", families_pb2.ListFamiliesRequest,
             families_pb2.ListFamiliesResponse, {}),
        ]
        answers = {}
        for method, request_type, response_type, payload in cases:
            status, body = self.post(method, payload)
            self.assertEqual(status, 200, (method, body))
            over_http = json_format.Parse(json.dumps(body), response_type())
            request = json_format.Parse(json.dumps(payload), request_type())
            over_grpc = getattr(self.stub, method)(request, timeout=10)
            if method == "Gate":
                for answer in (over_http, over_grpc):
                    answer.audit.ClearField("timestamp")
                    answer.audit.ClearField("request_id")
            self.assertEqual(over_http, over_grpc, method)
            answers[method] = over_http
        # Outside values for some of them. Source: zero-failure binomial
        # plan, the smallest n with (1 - 0.05)^n <= 0.05: ceil(ln 0.05 /
        # ln 0.95) = 59 (Python math).
        self.assertEqual(answers["PlanSamples"].holdout.zero_failure_sample_count,
                         math.ceil(math.log(0.05) / math.log(0.95)))
        self.assertEqual(answers["Gate"].verdict, gate_pb.VERDICT_REJECT)
        self.assertIn("holdout-binomial",
                      [f.family_name for f in answers["ListFamilies"].families])
        # An empty body is the empty message, as {} is.
        status, ctype, body = self.request("POST", "/v1/ListFamilies", "")
        self.assertEqual(status, 200)
        self.assertEqual(json_format.Parse(body, families_pb2.ListFamiliesResponse()),
                         answers["ListFamilies"])

    def test_undecodable_and_unknown(self):
        status, answer = self.post("Certify", {"noSuchField": 1})
        self.assertEqual(status, 400)
        self.assertIn("could not be decoded", answer["message"])
        status, ctype, body = self.request("POST", "/v1/Certify", "{not json")
        self.assertEqual(status, 400)
        status, ctype, body = self.request("GET", "/v1/NoSuchMethod")
        self.assertEqual(status, 404)
        self.assertEqual(json.loads(body)["code"], 5)  # NOT_FOUND
        status, ctype, body = self.request("POST", "/v1/NoSuchMethod", "{}")
        self.assertEqual(status, 404)
        self.assertIn("/v1/ListFamilies", json.loads(body)["message"])

    def test_body_above_the_request_limit_is_413(self):
        status, ctype, body = self.request("POST", "/v1/Certify", " " * 100_000)
        self.assertEqual(status, 413)
        self.assertIn("--max-request-bytes", json.loads(body)["message"])

    def test_zz_metrics_count_what_happened(self):
        _, before = parse_exposition(self.request("GET", "/metrics")[2])
        req = certify_pb.CertifyRequest(failure_probability=0.05,
                                        all_applicable=certify_pb.AllApplicable())
        req.evidence.holdout.error_count = 20
        req.evidence.holdout.sample_count = 1000
        for _ in range(7):
            self.stub.Certify(req, timeout=10)
        bad = certify_pb.CertifyRequest(failure_probability=2)
        for _ in range(3):
            with self.assertRaises(grpc.RpcError):
                self.stub.Certify(bad, timeout=10)
        gate = gate_pb.GateRequest()
        gate.policy.max_risk = 0.05
        gate.policy.failure_probability = 0.05
        gate.candidate.id = "m"
        gate.candidate.evidence.holdout.sample_count = 5000
        gate.candidate.evidence.holdout.error_count = 340
        for _ in range(2):
            self.stub.Gate(gate, timeout=10)
        status, ctype, text = self.request("GET", "/metrics")
        self.assertEqual(status, 200)
        self.assertTrue(ctype.startswith("text/plain; version=0.0.4"))
        types, after = parse_exposition(text)
        self.assertEqual(types["riskbound_calls_total"], "counter")
        self.assertEqual(types["riskbound_call_duration_seconds"], "histogram")

        def delta(metric, **labels):
            return value_of(after, metric, **labels) - value_of(before, metric, **labels)

        self.assertEqual(delta("riskbound_calls_total", transport="grpc", rpc="Certify",
                               code="OK"), 7)
        self.assertEqual(delta("riskbound_calls_total", transport="grpc", rpc="Certify",
                               code="INVALID_ARGUMENT"), 3)
        self.assertEqual(delta("riskbound_gate_verdicts_total", verdict="REJECT"), 2)
        # Hold-out evidence with all applicable families: three certificates a
        # call (exact binomial, Hoeffding, kl).
        for family in ("holdout-binomial", "holdout-hoeffding", "holdout-kl"):
            self.assertEqual(delta("riskbound_certificates_total", family=family), 7, family)
        self.assertEqual(value_of(after, "riskbound_limit", name="max_request_bytes"), 65536)
        # A call leaves the in-flight gauge in its last callback (OnDone),
        # which gRPC runs just after the client has its answer: wait for it.
        in_flight = value_of(after, "riskbound_calls_in_flight")
        deadline = time.monotonic() + 5
        while in_flight != 0 and time.monotonic() < deadline:
            time.sleep(0.02)
            _, _, text = self.request("GET", "/metrics")
            in_flight = value_of(parse_exposition(text)[1], "riskbound_calls_in_flight")
        self.assertEqual(in_flight, 0)
        build = [l for n, l, v in after if n == "riskbound_build_info"]
        self.assertEqual(len(build), 1)
        self.assertRegex(build[0]["version"], r"^\d+\.\d+\.\d+$")
        # Histograms: cumulative buckets, +Inf equals the count.
        buckets = [(float(l["le"]), v) for n, l, v in after
                   if n == "riskbound_call_duration_seconds_bucket" and l["rpc"] == "Certify"]
        self.assertEqual([b for b, _ in buckets], sorted(b for b, _ in buckets))
        self.assertTrue(math.isinf(buckets[-1][0]))
        counts = [v for _, v in buckets]
        self.assertEqual(counts, sorted(counts))
        self.assertEqual(counts[-1], value_of(after, "riskbound_call_duration_seconds_count",
                                              rpc="Certify"))


class BusyHttpTest(unittest.TestCase):
    def test_busy_is_429(self):
        load_stubs(ARGS.stubs)
        from riskbound.v1 import select_pb2 as select_pb  # noqa: E402
        d = os.path.join(os.environ.get("TMPDIR", "/tmp"), f"riskbound-busy-{os.getpid()}")
        os.makedirs(d, exist_ok=True)
        port_file = os.path.join(d, "http-port")
        server = ServerProcess(ARGS.server, "--http-listen", "127.0.0.1:0", "--http-port-file",
                               port_file, "--threads", "1", "--max-pending-calls", "1")
        try:
            with open(port_file) as f:
                port = int(f.read())
            structure = [{"id": f"c{i}", "errorCount": 100, "sampleCount": 10000 + i,
                          "capacity": {"vcDimension": 10 + i}} for i in range(10000)]
            body = json.dumps({"structure": structure, "family": "BOUND_FAMILY_VC_ADDITIVE",
                               "failureProbability": 0.05})

            def call():
                conn = http.client.HTTPConnection("127.0.0.1", port, timeout=60)
                conn.request("POST", "/v1/SelectStructure", body=body)
                resp = conn.getresponse()
                data = resp.read()
                conn.close()
                return resp.status, data

            with concurrent.futures.ThreadPoolExecutor(8) as pool:
                results = list(pool.map(lambda _: call(), range(8)))
            statuses = [s for s, _ in results]
            self.assertIn(200, statuses)
            self.assertIn(429, statuses)
            self.assertEqual(set(statuses), {200, 429})
            for s, data in results:
                if s == 429:
                    self.assertIn("--max-pending-calls", json.loads(data)["message"])
        finally:
            self.assertEqual(server.stop(), 0)


if __name__ == "__main__":
    run_module_tests()
