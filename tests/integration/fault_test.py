#!/usr/bin/python3
"""Faults against the real riskbound-server: clients that cancel, run out of
their deadline, die mid-call or mid-stream (the client process is killed),
send a registry stream at full speed and stop reading; SIGTERM and SIGINT
during load.

Each test checks that the server survives, keeps answering health checks,
frees every call (riskbound_calls_in_flight back to 0 on the metrics port),
loses no completed response (every answer a client received is whole and
valid: parsed, walked for NaN and out-of-range bounds, stream results in
order), and, for the signals, exits with the documented code (docs/server.md,
"Health, drain and exit codes") within its drain period. Every test runs in
a few seconds.
"""
import json
import os
import signal
import subprocess
import sys
import tempfile
import threading
import time
import unittest
import urllib.request

import grpc

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
from server_harness import ServerProcess, load_stubs, run_module_tests, sanitized  # noqa: E402
import bad_input_table_test as table  # noqa: E402  (check_answer)

ARGS = None


def import_stubs():
    load_stubs(ARGS.stubs)
    global pb_certify, pb_select, pb_reg, pb_gate, service_grpc
    from riskbound.v1 import certify_pb2 as pb_certify  # noqa: E402
    from riskbound.v1 import gate_pb2 as pb_gate  # noqa: E402
    from riskbound.v1 import registry_pb2 as pb_reg  # noqa: E402
    from riskbound.v1 import riskbound_pb2_grpc as service_grpc  # noqa: E402
    from riskbound.v1 import select_pb2 as pb_select  # noqa: E402


def certify_request(k=3, n=1000):
    r = pb_certify.CertifyRequest(failure_probability=0.05)
    r.evidence.holdout.error_count = k
    r.evidence.holdout.sample_count = n
    r.all_applicable.SetInParent()
    return r


def gate_request(k=3, n=1000):
    r = pb_gate.GateRequest()
    r.policy.max_risk = 0.05
    r.policy.failure_probability = 0.05
    r.candidate.id = "candidate"
    r.candidate.evidence.holdout.error_count = k
    r.candidate.evidence.holdout.sample_count = n
    return r


_SLOW = {}


def slow_select_request(candidates=10_000):
    """An admissible SelectStructure request that keeps a server thread busy
    for some milliseconds (10,000 candidates, the API's cap)."""
    if candidates not in _SLOW:
        from riskbound.v1 import common_pb2
        req = pb_select.SelectStructureRequest(failure_probability=0.05)
        req.family = common_pb2.BOUND_FAMILY_VC_ADDITIVE
        for i in range(candidates):
            c = req.structure.add(id=f"c{i}", error_count=100, sample_count=10_000 + i)
            c.capacity.vc_dimension = 10 + i
        _SLOW[candidates] = req
    return _SLOW[candidates]


def stream_settings():
    return pb_reg.ScoreRegistryRequest(
        settings=pb_reg.ScoreSettings(certify=pb_reg.CertifySettings(failure_probability=0.05)))


def stream_record(i, model_name="m"):
    r = pb_reg.RegistryRecord(record_id=f"r{i}", model_name=model_name, model_version="1")
    r.evidence.holdout.error_count = i % 50
    r.evidence.holdout.sample_count = 1000 + i
    return pb_reg.ScoreRegistryRequest(record=r)


def health_check(channel, timeout=5):
    """grpc.health.v1.Health/Check on the service name (open standard:
    grpc/health/v1/health.proto; SERVING = 1)."""
    check = channel.unary_unary("/grpc.health.v1.Health/Check",
                                request_serializer=lambda b: b,
                                response_deserializer=lambda b: b)
    name = b"riskbound.v1.RiskBound"
    return check(b"\x0a" + bytes([len(name)]) + name, timeout=timeout) == b"\x08\x01"


class Server:
    """riskbound-server with a metrics port, a channel and a stub."""

    @classmethod
    def start(cls, *flags, log_level="info"):
        self = cls()
        d = tempfile.mkdtemp(prefix="riskbound-fault-")
        self.http_port_file = os.path.join(d, "http-port")
        self.server = ServerProcess(ARGS.server, "--http-listen", "127.0.0.1:0",
                                    "--http-port-file", self.http_port_file, *flags,
                                    log_level=log_level)
        deadline = time.monotonic() + 20
        while True:
            text = ""
            if os.path.exists(self.http_port_file):
                with open(self.http_port_file) as f:
                    text = f.read().strip()
            if text:
                break
            if time.monotonic() > deadline:
                raise RuntimeError("no HTTP port: " + self.server.logs())
            time.sleep(0.02)
        self.http_port = int(text)
        self.channel = grpc.insecure_channel(self.server.address)
        grpc.channel_ready_future(self.channel).result(timeout=20)
        self.stub = service_grpc.RiskBoundStub(self.channel)
        return self

    def in_flight(self):
        with urllib.request.urlopen(f"http://127.0.0.1:{self.http_port}/metrics",
                                    timeout=5) as r:
            for line in r.read().decode().splitlines():
                if line.startswith("riskbound_calls_in_flight "):
                    return int(float(line.split()[1]))
        raise AssertionError("no riskbound_calls_in_flight in /metrics")

    def wait_idle(self, test, timeout=5.0):
        """Every call freed: the in-flight gauge back to 0 (a call leaves it
        just after its client has the answer, so poll)."""
        deadline = time.monotonic() + timeout
        n = self.in_flight()
        while n != 0 and time.monotonic() < deadline:
            time.sleep(0.05)
            n = self.in_flight()
        test.assertEqual(n, 0, "calls still in flight")

    def close(self):
        self.channel.close()
        return self.server.stop()


def check_select_answer(test, answer, candidates):
    test.assertEqual(len(answer.candidates), candidates)
    test.assertIn(answer.chosen_id, {c.id for c in answer.candidates})
    table.check_answer(test, answer)


def check_stream(test, answers, sent, finished_ok):
    """Results in order from record 0, each whole and valid; a summary
    last when the stream ended OK, with one result per record sent."""
    results = [a.result for a in answers if a.HasField("result")]
    for i, r in enumerate(results):
        test.assertEqual(r.record_index, i)
        test.assertEqual(r.record_id, f"r{i}")
        if (not finished_ok and i == len(results) - 1 and r.WhichOneof("outcome") == "error"
                and r.error.code in ("DEADLINE_EXCEEDED", "CANCELLED")):
            # The record being computed when the call's deadline passed (or
            # it was cancelled) is answered with that error, never a partial
            # certificate: whole, and the last one the stream sends.
            test.assertEqual(r.failure_probability, 0.0)
            continue
        test.assertEqual(r.WhichOneof("outcome"), "certified", r)
        table.check_answer(test, r)
    summaries = [a for a in answers if a.HasField("summary")]
    if finished_ok:
        test.assertEqual(len(summaries), 1)
        test.assertTrue(answers[-1].HasField("summary"))
        test.assertEqual(len(results), sent)
        test.assertEqual(answers[-1].summary.record_count, sent)
    else:
        test.assertEqual(summaries, [])
    return len(results)


# ---------------------------------------------------------------------------
# Child processes that are killed mid-call.

CHILD_UNARY = r"""
import sys, time, grpc
sys.path.insert(0, sys.argv[2])
sys.path.insert(0, sys.argv[3])
import fault_test as f
f.ARGS = type("A", (), {"stubs": sys.argv[3]})
f.import_stubs()
channel = grpc.insecure_channel(sys.argv[1])
call = channel.unary_unary("/riskbound.v1.RiskBound/SelectStructure",
                           request_serializer=lambda b: b, response_deserializer=lambda b: b)
body = f.slow_select_request().SerializeToString()  # once: the calls leave together
futures = [call.future(body, timeout=60) for _ in range(int(sys.argv[4]))]
print("started", flush=True)
time.sleep(60)
"""

CHILD_STREAM = r"""
import itertools, sys, threading, time, grpc
sys.path.insert(0, sys.argv[2])
sys.path.insert(0, sys.argv[3])
import fault_test as f
f.ARGS = type("A", (), {"stubs": sys.argv[3]})
f.import_stubs()
channel = grpc.insecure_channel(sys.argv[1])
stub = f.service_grpc.RiskBoundStub(channel)
def messages():
    yield f.stream_settings()
    for i in itertools.count():
        yield f.stream_record(i)
started = threading.Barrier(int(sys.argv[4]) + 1)
def run():
    seen = 0
    for answer in stub.ScoreRegistry(messages(), timeout=60):
        seen += 1
        if seen == 20:
            started.wait()
for _ in range(int(sys.argv[4])):
    threading.Thread(target=run, daemon=True).start()
started.wait()
print("streaming", flush=True)
time.sleep(60)
"""


def run_child(script, address, count):
    here = os.path.dirname(os.path.abspath(__file__))
    proc = subprocess.Popen([sys.executable, "-c", script, address, here, ARGS.stubs, str(count)],
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    line = proc.stdout.readline()
    if not line:
        proc.kill()
        raise AssertionError("child failed: " + proc.stderr.read())
    return proc, line.strip()


# ---------------------------------------------------------------------------

class ClientFaultTest(unittest.TestCase):
    """Clients that give up, die or stop reading; one server per test."""

    @classmethod
    def setUpClass(cls):
        import_stubs()

    def setUp(self):
        self.s = Server.start("--threads", "2", "--max-pending-calls", "256")

    def tearDown(self):
        self.assertTrue(health_check(self.s.channel))
        self.assertEqual(self.s.close(), 0)

    def test_cancelled_calls(self):
        req = slow_select_request()
        futures = [self.s.stub.SelectStructure.future(req, timeout=60) for _ in range(24)]
        time.sleep(0.05)
        for f in futures[::2]:
            f.cancel()
        done = 0
        for i, f in enumerate(futures):
            try:
                check_select_answer(self, f.result(timeout=60), 10_000)
                done += 1
            except grpc.FutureCancelledError:
                self.assertEqual(i % 2, 0)
        self.assertGreaterEqual(done, 12)
        # Streams cancelled mid-way: results so far whole and in order.
        for cut in (1, 5, 40):
            answers = []
            call = self.s.stub.ScoreRegistry(
                iter([stream_settings()] + [stream_record(i) for i in range(100)]), timeout=30)
            with self.assertRaises(grpc.RpcError) as ctx:
                for answer in call:
                    answers.append(answer)
                    if len(answers) == cut:
                        call.cancel()
            self.assertEqual(ctx.exception.code(), grpc.StatusCode.CANCELLED)
            check_stream(self, answers, 100, finished_ok=False)
        self.s.wait_idle(self)
        check_select_answer(self, self.s.stub.SelectStructure(req, timeout=30), 10_000)

    def test_deadlines_exceeded(self):
        req = slow_select_request()
        futures = [self.s.stub.SelectStructure.future(req, timeout=0.005 * (1 + i % 10))
                   for i in range(40)]
        codes = []
        for f in futures:
            try:
                check_select_answer(self, f.result(), 10_000)
                codes.append(grpc.StatusCode.OK)
            except grpc.RpcError as e:
                codes.append(e.code())
        self.assertIn(grpc.StatusCode.DEADLINE_EXCEEDED, codes)
        self.assertLessEqual(set(codes), {grpc.StatusCode.OK, grpc.StatusCode.DEADLINE_EXCEEDED})
        # A stream whose deadline passes mid-way: the results it got are whole.
        def endless():
            yield stream_settings()
            i = 0
            while True:
                yield stream_record(i)
                i += 1
        answers = []
        with self.assertRaises(grpc.RpcError) as ctx:
            for answer in self.s.stub.ScoreRegistry(endless(), timeout=0.5):
                answers.append(answer)
        self.assertEqual(ctx.exception.code(), grpc.StatusCode.DEADLINE_EXCEEDED)
        self.assertGreater(check_stream(self, answers, None, finished_ok=False), 0)
        self.s.wait_idle(self)

    def test_client_killed_mid_call(self):
        proc, line = run_child(CHILD_UNARY, self.s.server.address, 64)
        try:
            self.assertEqual(line, "started")
            deadline = time.monotonic() + 10
            while self.s.in_flight() < 8 and time.monotonic() < deadline:
                time.sleep(0.01)
            self.assertGreaterEqual(self.s.in_flight(), 8)
        finally:
            proc.kill()
            proc.wait(timeout=10)
        # The dead client's calls are cancelled with its connection, the
        # queued ones stop at once instead of being computed for nobody.
        self.s.wait_idle(self)
        self.assertTrue(health_check(self.s.channel))
        check_select_answer(self, self.s.stub.SelectStructure(slow_select_request(), timeout=30),
                            10_000)

    def test_client_killed_mid_stream(self):
        rss_before = self.s.server.proc_status("VmRSS")
        proc, line = run_child(CHILD_STREAM, self.s.server.address, 4)
        try:
            self.assertEqual(line, "streaming")
            self.assertEqual(self.s.in_flight(), 4)
        finally:
            proc.kill()
            proc.wait(timeout=10)
        self.s.wait_idle(self)
        self.assertTrue(health_check(self.s.channel))
        answers = list(self.s.stub.ScoreRegistry(
            iter([stream_settings()] + [stream_record(i) for i in range(50)]), timeout=30))
        check_stream(self, answers, 50, finished_ok=True)
        self.assertLess(self.s.server.proc_status("VmRSS") - rss_before, 50 * 1024)

    def test_stream_sent_at_full_speed_and_never_read(self):
        # The client sends records as fast as gRPC lets it and reads no
        # answer: HTTP/2 flow control must stall the sender (the server holds
        # one request and one answer per stream), not buffer without bound.
        # Records of about 250 bytes, so that the flow-control windows
        # (grown by gRPC's bandwidth probing to a few MB on loopback) fill in
        # about a second.
        sent = [0]
        name = "m" * 200

        def endless():
            yield stream_settings()
            i = 0
            while True:
                yield stream_record(i, model_name=name)
                i += 1
                sent[0] = i

        rss_before = self.s.server.proc_status("VmRSS")
        call = self.s.stub.ScoreRegistry(endless(), timeout=30)
        samples = [-1]
        deadline = time.monotonic() + 10
        while time.monotonic() < deadline:
            time.sleep(0.5)
            samples.append(sent[0])
            if samples[-1] == samples[-2] == samples[-3]:
                break
        self.assertEqual(samples[-1], samples[-3], f"the sender was never held back: {samples}")
        self.assertLess(samples[-1], 100_000)
        # The server is not stuck behind the stalled stream.
        self.assertTrue(health_check(self.s.channel))
        table.check_answer(self, self.s.stub.Certify(certify_request(), timeout=10))
        table.check_answer(self, self.s.stub.Gate(gate_request(), timeout=10))
        if not sanitized(ARGS.server):
            # (A sanitized server's resident memory also holds ASan's
            # quarantine: 103 MiB more here in the sanitized CI run.)
            self.assertLess(self.s.server.proc_status("VmRSS") - rss_before, 50 * 1024)
        # Reading again resumes the stream where it stopped, in order.
        answers = [next(call) for _ in range(200)]
        check_stream(self, answers, None, finished_ok=False)
        call.cancel()
        self.s.wait_idle(self)


class SignalDuringLoadTest(unittest.TestCase):
    """SIGTERM or SIGINT while clients send unary calls and streams: the
    drain keeps every call in flight whole, refuses new ones with
    UNAVAILABLE, and the process exits 0 within --drain-seconds; a stream
    still running when the drain period ends is cut and the exit code is 3."""

    @classmethod
    def setUpClass(cls):
        import_stubs()

    def load_under_signal(self, sig):
        drain = 5.0
        s = Server.start("--threads", "2", "--max-pending-calls", "256", "--drain-seconds",
                         str(drain), log_level="debug")
        stop = threading.Event()
        unary_answers, unary_errors = [], []
        streams = []  # (started before the signal, answers, ok, error code)
        signalled_at = [None]
        lock = threading.Lock()

        def unary_loop(kind):
            while not stop.is_set():
                try:
                    if kind == 0:
                        a = s.stub.Certify(certify_request(), timeout=10)
                    elif kind == 1:
                        a = s.stub.Gate(gate_request(), timeout=10)
                    else:
                        a = s.stub.SelectStructure(slow_select_request(200), timeout=10)
                    with lock:
                        unary_answers.append(a)
                except grpc.RpcError as e:
                    with lock:
                        unary_errors.append((e.code(), e.details()))
                    time.sleep(0.01)

        def stream_loop():
            while not stop.is_set():
                answers, first_result_before_signal = [], [None]
                try:
                    for a in s.stub.ScoreRegistry(
                            iter([stream_settings()] + [stream_record(i) for i in range(300)]),
                            timeout=20):
                        if first_result_before_signal[0] is None:
                            first_result_before_signal[0] = signalled_at[0] is None
                        answers.append(a)
                    with lock:
                        streams.append((first_result_before_signal[0], answers, True, None))
                except grpc.RpcError as e:
                    with lock:
                        streams.append((first_result_before_signal[0], answers, False, e.code()))
                    time.sleep(0.01)

        threads = [threading.Thread(target=unary_loop, args=(i % 3,)) for i in range(6)]
        threads += [threading.Thread(target=stream_loop) for _ in range(2)]
        for t in threads:
            t.start()
        time.sleep(0.8)
        signalled_at[0] = time.monotonic()
        s.server.signal(sig)
        code = s.server.wait(timeout=drain + 10)
        took = time.monotonic() - signalled_at[0]
        stop.set()
        for t in threads:
            t.join(timeout=30)
        s.channel.close()

        self.assertEqual(code, 0, s.server.logs()[-2000:])
        self.assertLess(took, drain + 1.0)
        # Every completed answer is whole and valid.
        self.assertGreater(len(unary_answers), 20)
        for a in unary_answers:
            table.check_answer(self, a)
        # Refused by the draining service or, once it is gone, by the
        # transport (UNAVAILABLE); or cancelled by the gRPC library in the
        # instant the connections close, before the call started.
        for code_, details in unary_errors:
            self.assertIn((code_, details if code_ == grpc.StatusCode.CANCELLED else ""),
                          [(grpc.StatusCode.UNAVAILABLE, ""),
                           (grpc.StatusCode.CANCELLED, "CANCELLED")], details)
        ok_streams = 0
        for before, answers, ok, err in streams:
            check_stream(self, answers, 300, finished_ok=ok)
            if ok:
                ok_streams += 1
            else:
                self.assertIn(err, (grpc.StatusCode.UNAVAILABLE, grpc.StatusCode.CANCELLED))
                # A stream the server had started answering before the
                # signal is in flight: the drain lets it finish.
                self.assertNotEqual(before, True, "a stream in flight was cut by the drain")
        self.assertGreater(ok_streams, 0)
        # Every call the server started ended OK, or was refused UNAVAILABLE
        # by the drain (the debug log has one line per call).
        codes = set()
        for line in s.server.logs().splitlines():
            entry = json.loads(line)
            if entry.get("message") == "call":
                codes.add(entry["code"])
        self.assertLessEqual(codes, {"OK", "UNAVAILABLE"})
        self.assertIn("every call in flight finished", s.server.logs())

    def test_sigterm_during_load(self):
        self.load_under_signal(signal.SIGTERM)

    def test_sigint_during_load(self):
        self.load_under_signal(signal.SIGINT)

    def test_idle_client_does_not_hold_the_drain(self):
        # A client that stays connected after its last call (a connection
        # pool, a prober) used to hold gRPC's shutdown until the drain
        # period's end, past the second the server waits for it: exit 3 and
        # "a call did not stop when cancelled" for a server with nothing in
        # flight. Found by these fault tests.
        s = Server.start("--drain-seconds", "10")
        table.check_answer(self, s.stub.Certify(certify_request(), timeout=10))
        time.sleep(0.5)
        start = time.monotonic()
        s.server.signal(signal.SIGTERM)
        code = s.server.wait(timeout=20)
        took = time.monotonic() - start
        s.channel.close()
        self.assertEqual(code, 0, s.server.logs()[-1000:])
        self.assertLess(took, 2.0)
        self.assertIn("every call in flight finished", s.server.logs())

    def test_stream_outliving_the_drain_period(self):
        s = Server.start("--drain-seconds", "1")
        answers = []
        error = []

        def endless():
            yield stream_settings()
            i = 0
            while True:
                yield stream_record(i)
                i += 1
                time.sleep(0.01)

        def reader():
            try:
                for a in s.stub.ScoreRegistry(endless(), timeout=30):
                    answers.append(a)
            except grpc.RpcError as e:
                error.append(e.code())

        t = threading.Thread(target=reader)
        t.start()
        time.sleep(0.5)
        self.assertGreater(len(answers), 0)
        start = time.monotonic()
        s.server.signal(signal.SIGTERM)
        code = s.server.wait(timeout=10)
        took = time.monotonic() - start
        t.join(timeout=10)
        s.channel.close()
        self.assertEqual(code, 3)  # the drain period ran out: calls cancelled
        self.assertLess(took, 1.0 + 1.0 + 0.5)
        self.assertIn(error[0], (grpc.StatusCode.UNAVAILABLE, grpc.StatusCode.CANCELLED))
        check_stream(self, answers, None, finished_ok=False)
        self.assertIn("drain period ran out", s.server.logs())


if __name__ == "__main__":
    run_module_tests()
