#!/usr/bin/python3
"""End-to-end tests of `riskbound health`, the gRPC health probe.

Two servers answer it: the real riskbound-server (started by harness.py), and
a stand-in health server written here with Debian's grpcio that answers each
status of the open gRPC Health Checking Protocol (grpc/health/v1/health.proto:
UNKNOWN = 0, SERVING = 1, NOT_SERVING = 2, SERVICE_UNKNOWN = 3; an unknown
service name is answered with the status code NOT_FOUND). Messages are
encoded by hand on the protobuf wire format (open standard: field 1 of
HealthCheckRequest is the service name, length-delimited, tag 0x0a; field 1
of HealthCheckResponse is the status, varint, tag 0x08).

Exit codes under test (riskbound health --help, README): 0 SERVING, 6 the
server answered but not SERVING, 4 unreachable, 2 usage, 1 other failure.
"""
import json
import threading
import unittest
from concurrent import futures

import grpc

import harness

SERVICE = "riskbound.v1.RiskBound"


def health(*args, **kwargs):
    return harness.run_cli("health", *args, **kwargs)


def encode_request(service):
    """HealthCheckRequest{service} by hand: tag 0x0a, length, bytes."""
    data = service.encode()
    return b"" if not data else b"\x0a" + bytes([len(data)]) + data


class StandIn:
    """A grpcio server whose Health/Check answers what the test sets, and
    records the raw request bytes it received."""

    def __init__(self):
        self.answer = b"\x08\x01"
        self.code = None  # a grpc.StatusCode to fail with instead
        self.requests = []
        self.lock = threading.Lock()
        handler = grpc.method_handlers_generic_handler("grpc.health.v1.Health", {
            "Check": grpc.unary_unary_rpc_method_handler(self.check),
        })
        self.server = grpc.server(futures.ThreadPoolExecutor(max_workers=2))
        self.server.add_generic_rpc_handlers((handler,))
        self.port = self.server.add_insecure_port("127.0.0.1:0")
        self.server.start()
        self.address = f"127.0.0.1:{self.port}"

    def check(self, request, context):
        with self.lock:
            self.requests.append(request)
        if self.code is not None:
            context.abort(self.code, "stand-in refusal")
        return self.answer

    def stop(self):
        self.server.stop(grace=None).wait(10)


class RealServerTest(unittest.TestCase):
    def test_whole_server_serving(self):
        code, out, err = health()
        self.assertEqual(code, 0, err)
        self.assertEqual(out.splitlines()[0], "SERVING")
        self.assertIn("the whole server at " + harness.ADDRESS, out)
        self.assertEqual(err, "")

    def test_riskbound_service_serving(self):
        # The name a Kubernetes readiness probe and the image's HEALTHCHECK ask for.
        code, out, err = health("--service", SERVICE)
        self.assertEqual(code, 0, out + err)
        self.assertEqual(out.splitlines()[0], "SERVING")
        self.assertIn("service " + SERVICE, out)

    def test_json_output_is_the_response_in_the_json_mapping(self):
        code, out, err = health("--output", "json")
        self.assertEqual(code, 0, err)
        self.assertEqual(json.loads(out), {"status": "SERVING"})

    def test_unknown_service_exit_6(self):
        code, out, err = health("--service", "no.such.Service")
        self.assertEqual(code, 6)
        self.assertEqual(out.splitlines()[0], "SERVICE_UNKNOWN")
        self.assertIn('does not know the service "no.such.Service"', err)

    def test_agrees_with_grpcio(self):
        # The same check made by Debian's grpcio, an implementation outside
        # the project: SERVING (08 01) for "", NOT_FOUND for an unknown name.
        channel = grpc.insecure_channel(harness.ADDRESS)
        try:
            check = channel.unary_unary("/grpc.health.v1.Health/Check",
                                        request_serializer=lambda b: b,
                                        response_deserializer=lambda b: b)
            self.assertEqual(check(encode_request(""), timeout=10), b"\x08\x01")
            self.assertEqual(health()[0], 0)
            with self.assertRaises(grpc.RpcError) as caught:
                check(encode_request("no.such.Service"), timeout=10)
            self.assertEqual(caught.exception.code(), grpc.StatusCode.NOT_FOUND)
            self.assertEqual(health("--service", "no.such.Service")[0], 6)
        finally:
            channel.close()

    def test_unreachable_exit_4(self):
        port = harness.free_port_nobody_listens_on()
        code, out, err = health("--server", f"127.0.0.1:{port}", "--timeout", "2")
        self.assertEqual(code, 4)
        self.assertEqual(out, "")
        self.assertIn(f"cannot reach the server at 127.0.0.1:{port}", err)

    def test_usage_exit_2(self):
        for args in (("--bogus",), ("extra-word",), ("--timeout", "0"), ("--timeout", "x"),
                     ("--output", "yaml"), ("--service",)):
            code, out, err = health(*args)
            self.assertEqual(code, 2, args)
            self.assertEqual(out, "", args)
            self.assertIn("riskbound health", err, args)

    def test_help_documents_the_exit_codes(self):
        code, out, err = health("--help")
        self.assertEqual(code, 0, err)
        self.assertIn("--service NAME", out)
        self.assertIn("exit codes: 0 SERVING; 6 the server answered, but not SERVING", out)
        code, out, _ = harness.run_cli("--help", server=False)
        self.assertEqual(code, 0)
        self.assertIn("health", out)
        self.assertIn("6  health: the server answered, but not SERVING", out)


class StandInServerTest(unittest.TestCase):
    @classmethod
    def setUpClass(cls):
        cls.standin = StandIn()

    @classmethod
    def tearDownClass(cls):
        cls.standin.stop()

    def ask(self, *args):
        return health("--server", self.standin.address, *args)

    def test_request_bytes_on_the_wire(self):
        with self.standin.lock:
            self.standin.requests.clear()
        self.standin.answer, self.standin.code = b"\x08\x01", None
        self.assertEqual(self.ask("--service", SERVICE)[0], 0)
        self.assertEqual(self.ask()[0], 0)
        with self.standin.lock:
            # 0x0a = field 1, length-delimited; 0x16 = 22 bytes; the empty
            # name is proto3's default and is not written at all.
            self.assertEqual(self.standin.requests,
                             [b"\x0a\x16riskbound.v1.RiskBound", b""])

    def test_each_status(self):
        self.standin.code = None
        cases = (
            (b"\x08\x01", 0, "SERVING"),
            (b"\x08\x02", 6, "NOT_SERVING"),
            (b"", 6, "UNKNOWN"),               # status omitted: proto3 default 0
            (b"\x08\x00", 6, "UNKNOWN"),
            (b"\x08\x03", 6, "SERVICE_UNKNOWN"),
            (b"\x08\x07", 6, "UNKNOWN_STATUS_7"),  # a value from a newer protocol
            # An unknown field 2 (varint 5) before the status is skipped.
            (b"\x10\x05\x08\x01", 0, "SERVING"),
        )
        for answer, want_code, want_word in cases:
            self.standin.answer = answer
            code, out, err = self.ask()
            self.assertEqual(code, want_code, (answer, err))
            self.assertEqual(out.splitlines()[0], want_word, answer)
            code, out, err = self.ask("--output", "json")
            self.assertEqual(code, want_code, (answer, err))
            self.assertEqual(json.loads(out), {"status": want_word}, answer)

    def test_malformed_answer_exit_1(self):
        self.standin.code = None
        self.standin.answer = b"\x08"  # a tag without its varint
        code, out, err = self.ask()
        self.assertEqual(code, 1)
        self.assertEqual(out, "")
        self.assertIn("malformed grpc.health.v1.HealthCheckResponse", err)

    def test_refusals(self):
        self.standin.code = grpc.StatusCode.UNIMPLEMENTED
        code, _, err = self.ask()
        self.assertEqual(code, 1)
        self.assertIn("has no gRPC health service", err)
        self.standin.code = grpc.StatusCode.UNAVAILABLE
        self.assertEqual(self.ask()[0], 4)
        self.standin.code = grpc.StatusCode.NOT_FOUND
        code, out, _ = self.ask("--service", "x.Y")
        self.assertEqual((code, out.splitlines()[0]), (6, "SERVICE_UNKNOWN"))
        self.standin.code = None


if __name__ == "__main__":
    harness.main()
