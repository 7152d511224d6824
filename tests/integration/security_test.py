#!/usr/bin/python3
"""TLS, mutual TLS and bearer tokens, against the real riskbound-server.

The certificates are made at test time with the `openssl` CLI (pki.py). The
server is the real binary on 127.0.0.1:0 (server_harness.py); the clients
are Debian's grpcio with the generated stubs, Python's http.client and ssl
(the HTTP port), and the real riskbound CLI. Checked:

* the transport must be chosen: without TLS files and without --plaintext
  the server does not start (exit 2), and --plaintext logs a warning;
* TLS: a client without the CA fails, one with it succeeds, on the gRPC and
  the HTTP port; a plaintext client fails; an expired server certificate is
  refused by the client;
* mutual TLS: a client without a certificate, with one from another CA, or
  with an expired one fails; a good one succeeds (gRPC, HTTPS, CLI);
* bearer tokens: no token, a wrong one or another scheme is UNAUTHENTICATED
  with one identical message; the health service stays open; SIGHUP rotates
  the tokens (and a broken file keeps the old ones); the refusals are
  counted in the metrics; no token ever appears in the log, even at debug.

The value a successful Certify returns is checked against the closed form of
the one-sided Clopper-Pearson bound with no errors, 1 - delta**(1/n)
(Source: Clopper & Pearson 1934; for k = 0 the binomial tail is (1-p)^n).
"""
import http.client
import json
import os
import shutil
import signal
import ssl
import subprocess
import sys
import tempfile
import time
import unittest

import grpc

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
import pki  # noqa: E402
from server_harness import ServerProcess, load_stubs, run_module_tests  # noqa: E402

ARGS = None
PKI = None  # {name: path}, made once in setUpModule
PKI_DIR = None
HEALTH = "/grpc.health.v1.Health/Check"
SERVING = b"\x08\x01"  # HealthCheckResponse{status: SERVING} (grpc/health/v1/health.proto)
# Source: Clopper & Pearson 1934, k = 0: the upper bound solves (1-p)^n = delta.
ZERO_OF_300_AT_5_PERCENT = 1 - 0.05 ** (1 / 300)
TOKEN_A = "a1b2c3d4e5f60718293a4b5c6d7e8f90"
TOKEN_B = "rotated-0f1e2d3c4b5a69788796a5b4"
WRONG = "a1b2c3d4e5f60718293a4b5c6d7e8f91"  # one character off TOKEN_A


def setUpModule():
    global PKI, PKI_DIR, certify_pb, registry_pb, service_grpc
    load_stubs(ARGS.stubs)
    from riskbound.v1 import certify_pb2 as certify_pb  # noqa: E402
    from riskbound.v1 import registry_pb2 as registry_pb  # noqa: E402
    from riskbound.v1 import riskbound_pb2_grpc as service_grpc  # noqa: E402
    PKI_DIR = tempfile.mkdtemp(prefix="riskbound-pki-")
    PKI = pki.make_pki(PKI_DIR)


def tearDownModule():
    shutil.rmtree(PKI_DIR, ignore_errors=True)


def write_tokens(path, *tokens, comment="# riskbound test tokens"):
    with open(path, "w") as f:
        f.write(comment + "\n" + "\n".join(tokens) + "\n")


def certify_request():
    r = certify_pb.CertifyRequest(failure_probability=0.05)
    r.evidence.holdout.error_count = 0
    r.evidence.holdout.sample_count = 300
    return r


def tls_credentials(ca=True, cert=None):
    return grpc.ssl_channel_credentials(
        root_certificates=pki.read(PKI["ca.pem"]) if ca else None,
        private_key=pki.read(PKI[cert + ".key"]) if cert else None,
        certificate_chain=pki.read(PKI[cert + ".pem"]) if cert else None)


def call_certify(channel, token=None, header=None):
    """(status code, details, answer) of one Certify."""
    stub = service_grpc.RiskBoundStub(channel)
    metadata = []
    if token is not None:
        metadata.append(("authorization", f"Bearer {token}"))
    if header is not None:
        metadata.append(("authorization", header))
    try:
        answer = stub.Certify(certify_request(), timeout=10, metadata=metadata)
        return grpc.StatusCode.OK, "", answer
    except grpc.RpcError as e:
        return e.code(), e.details(), None


def health(channel):
    check = channel.unary_unary(HEALTH, request_serializer=lambda b: b,
                                response_deserializer=lambda b: b)
    try:
        return check(b"", timeout=10)
    except grpc.RpcError as e:
        return e.code()


def https(port, path, cert=None, ca=True, token=None):
    """(HTTP status, body) of a GET (or a POST for /v1/...) over TLS."""
    ctx = ssl.create_default_context(cafile=PKI["ca.pem"] if ca else None)
    if cert:
        ctx.load_cert_chain(PKI[cert + ".pem"], PKI[cert + ".key"])
    conn = http.client.HTTPSConnection("127.0.0.1", port, context=ctx, timeout=10)
    return _request(conn, path, token)


def plain_http(port, path, token=None):
    return _request(http.client.HTTPConnection("127.0.0.1", port, timeout=10), path, token)


def _request(conn, path, token):
    headers = {"Content-Type": "application/json"}
    if token:
        headers["Authorization"] = f"Bearer {token}"
    try:
        if path.startswith("/v1/"):
            body = json.dumps({"evidence": {"holdout": {"errorCount": 0, "sampleCount": 300}},
                               "failureProbability": 0.05})
            conn.request("POST", path, body=body, headers=headers)
        else:
            conn.request("GET", path, headers=headers)
        r = conn.getresponse()
        return r.status, r.read().decode()
    finally:
        conn.close()


def cli(*args, env=None):
    run_env = dict(os.environ)
    run_env.pop("RISKBOUND_AUTH_TOKEN", None)
    run_env.pop("RISKBOUND_SERVER", None)
    run_env.update(env or {})
    p = subprocess.run([ARGS.cli] + list(args), capture_output=True, text=True, timeout=60,
                       env=run_env)
    return p.returncode, p.stdout, p.stderr


def metric(server_http_port, name, labels, token=None, cert=None, tls=True):
    status, body = (https(server_http_port, "/metrics", cert=cert, token=token) if tls
                    else plain_http(server_http_port, "/metrics", token=token))
    assert status == 200, (status, body)
    for line in body.splitlines():
        if line.startswith(name + "{" + labels + "}"):
            return float(line.rsplit(" ", 1)[1])
    return 0.0


def start(*flags, plaintext=False, http=True):
    d = tempfile.mkdtemp(prefix="riskbound-sec-")
    extra = []
    if http:
        extra = ["--http-listen", "127.0.0.1:0", "--http-port-file", os.path.join(d, "http")]
    server = ServerProcess(ARGS.server, *(extra + list(flags)), plaintext=plaintext)
    server.http_port = 0
    if http:
        with open(os.path.join(d, "http")) as f:
            server.http_port = int(f.read())
    return server


class TransportChoiceTest(unittest.TestCase):
    def run_server(self, *args, env=None):
        p = subprocess.run([ARGS.server, "--listen", "127.0.0.1:0"] + list(args),
                           capture_output=True, text=True, timeout=20, env=env)
        return p.returncode, p.stdout, p.stderr

    def test_no_transport_is_a_usage_error(self):
        code, out, err = self.run_server()
        self.assertEqual(code, 2)
        self.assertEqual(out, "")
        for named in ("--tls-cert-file", "--tls-key-file", "--plaintext"):
            self.assertIn(named, err)

    def test_conflicts_and_missing_halves_are_usage_errors(self):
        cases = [
            (["--plaintext", "--tls-cert-file", PKI["server.pem"], "--tls-key-file",
              PKI["server.key"]], "--plaintext"),
            (["--tls-cert-file", PKI["server.pem"]], "--tls-key-file"),
            (["--tls-key-file", PKI["server.key"]], "--tls-cert-file"),
            (["--plaintext", "--tls-client-ca-file", PKI["ca.pem"]], "--tls-client-ca-file"),
            (["--plaintext=maybe"], "--plaintext"),
        ]
        for args, named in cases:
            code, _, err = self.run_server(*args)
            self.assertEqual(code, 2, (args, err))
            self.assertIn(named, err, args)

    def test_bad_files_stop_the_start_naming_the_flag(self):
        cases = [
            (["--tls-cert-file", "/nonexistent/cert.pem", "--tls-key-file", PKI["server.key"]],
             "--tls-cert-file"),
            (["--tls-cert-file", PKI["server.pem"], "--tls-key-file", PKI["client.key"]],
             "--tls-key-file"),  # a key of another certificate
            (["--tls-cert-file", PKI["server.key"], "--tls-key-file", PKI["server.key"]],
             "--tls-cert-file"),  # not a certificate
            (["--tls-cert-file", PKI["server.pem"], "--tls-key-file", PKI["server.key"],
              "--tls-client-ca-file", "/nonexistent/ca.pem"], "--tls-client-ca-file"),
            (["--plaintext", "--auth-token-file", "/nonexistent/tokens"], "--auth-token-file"),
        ]
        for args, named in cases:
            code, out, err = self.run_server("--log-format", "json", *args)
            self.assertEqual(code, 1, (args, out, err))
            self.assertIn(named, out + err, args)

    def test_a_short_token_is_refused_without_being_quoted(self):
        d = tempfile.mkdtemp(prefix="riskbound-sec-")
        path = os.path.join(d, "tokens")
        write_tokens(path, TOKEN_A, "tooshort9")
        code, out, err = self.run_server("--plaintext", "--auth-token-file", path)
        self.assertEqual(code, 1)
        self.assertIn("line 3", out + err)
        self.assertNotIn("tooshort9", out + err)
        self.assertNotIn(TOKEN_A, out + err)

    def test_environment_chooses_too_and_plaintext_warns(self):
        env = dict(os.environ, RISKBOUND_PLAINTEXT="true")
        server = ServerProcess(ARGS.server, env=env, plaintext=False, log_level="info")
        try:
            with grpc.insecure_channel(server.address) as ch:
                self.assertEqual(health(ch), SERVING)
        finally:
            self.assertEqual(server.stop(), 0)
        first = json.loads(server.logs().splitlines()[0])
        self.assertEqual(first["level"], "warning")
        self.assertIn("plaintext", first["message"])


class TlsTest(unittest.TestCase):
    """TLS without client certificates, and tokens over it."""

    @classmethod
    def setUpClass(cls):
        cls.dir = tempfile.mkdtemp(prefix="riskbound-sec-")
        cls.tokens = os.path.join(cls.dir, "tokens")
        write_tokens(cls.tokens, TOKEN_A)
        cls.server = start("--tls-cert-file", PKI["server.pem"], "--tls-key-file",
                           PKI["server.key"], "--auth-token-file", cls.tokens)

    @classmethod
    def tearDownClass(cls):
        cls.server.stop()

    def test_client_with_the_ca_succeeds(self):
        with grpc.secure_channel(self.server.address, tls_credentials()) as ch:
            code, details, answer = call_certify(ch, token=TOKEN_A)
            self.assertEqual(code, grpc.StatusCode.OK, details)
            self.assertAlmostEqual(answer.tightest.risk_upper_bound, ZERO_OF_300_AT_5_PERCENT,
                                   places=9)
            self.assertEqual(health(ch), SERVING)

    def test_client_without_the_ca_fails(self):
        with grpc.secure_channel(self.server.address, tls_credentials(ca=False)) as ch:
            code, _, _ = call_certify(ch, token=TOKEN_A)
            self.assertEqual(code, grpc.StatusCode.UNAVAILABLE)

    def test_plaintext_client_fails(self):
        with grpc.insecure_channel(self.server.address) as ch:
            self.assertEqual(health(ch), grpc.StatusCode.UNAVAILABLE)

    def test_http_port_speaks_tls_only(self):
        status, body = https(self.server.http_port, "/v1/Certify", token=TOKEN_A)
        self.assertEqual(status, 200, body)
        self.assertAlmostEqual(json.loads(body)["tightest"]["riskUpperBound"],
                               ZERO_OF_300_AT_5_PERCENT, places=9)
        with self.assertRaises(ssl.SSLCertVerificationError):
            https(self.server.http_port, "/metrics", ca=False, token=TOKEN_A)
        with self.assertRaises((http.client.HTTPException, ConnectionError)):
            plain_http(self.server.http_port, "/metrics", token=TOKEN_A)

    def test_cli_with_the_ca(self):
        address = self.server.address
        code, out, err = cli("certify", "--holdout-error-count", "0", "--holdout-sample-count",
                             "300", "--server", address, "--tls-ca-file", PKI["ca.pem"],
                             "--auth-token-file", self.tokens, "--output", "json")
        self.assertEqual(code, 0, err)
        self.assertAlmostEqual(json.loads(out)["tightest"]["riskUpperBound"],
                               ZERO_OF_300_AT_5_PERCENT, places=9)
        code, out, err = cli("health", "--server", address, "--tls-ca-file", PKI["ca.pem"])
        self.assertEqual((code, out.splitlines()[0]), (0, "SERVING"), err)
        # By name: the certificate carries localhost as well.
        code, _, err = cli("health", "--server", f"localhost:{self.server.port}",
                           "--tls-ca-file", PKI["ca.pem"])
        self.assertEqual(code, 0, err)
        # The CLI talks plaintext to loopback unless told otherwise: unreachable.
        code, _, err = cli("health", "--server", address)
        self.assertEqual(code, 4, err)
        # TLS without the CA: the system's CAs do not know the test CA.
        code, _, err = cli("health", "--server", address, "--tls-server-name", "localhost")
        self.assertEqual(code, 4, err)

    def test_expired_server_certificate_is_refused_by_clients(self):
        server = start("--tls-cert-file", PKI["expired-server.pem"], "--tls-key-file",
                       PKI["expired-server.key"])
        try:
            with grpc.secure_channel(server.address, tls_credentials()) as ch:
                self.assertEqual(health(ch), grpc.StatusCode.UNAVAILABLE)
            with self.assertRaises(ssl.SSLCertVerificationError):
                https(server.http_port, "/metrics")
            code, _, err = cli("health", "--server", server.address, "--tls-ca-file",
                               PKI["ca.pem"])
            self.assertEqual(code, 4, err)
        finally:
            self.assertEqual(server.stop(), 0)
        self.assertIn("has expired", server.logs())


class MutualTlsTest(unittest.TestCase):
    @classmethod
    def setUpClass(cls):
        cls.server = start("--tls-cert-file", PKI["server.pem"], "--tls-key-file",
                           PKI["server.key"], "--tls-client-ca-file", PKI["ca.pem"])

    @classmethod
    def tearDownClass(cls):
        cls.server.stop()

    def test_good_client_certificate_succeeds(self):
        with grpc.secure_channel(self.server.address, tls_credentials(cert="client")) as ch:
            code, details, answer = call_certify(ch)
            self.assertEqual(code, grpc.StatusCode.OK, details)
            self.assertAlmostEqual(answer.tightest.risk_upper_bound, ZERO_OF_300_AT_5_PERCENT,
                                   places=9)
        status, body = https(self.server.http_port, "/metrics", cert="client")
        self.assertEqual(status, 200)
        self.assertIn("riskbound_build_info", body)

    def test_clients_without_a_good_certificate_fail(self):
        for cert in (None, "other-client", "expired-client"):
            with grpc.secure_channel(self.server.address, tls_credentials(cert=cert)) as ch:
                code, _, _ = call_certify(ch)
                self.assertEqual(code, grpc.StatusCode.UNAVAILABLE, cert)
                self.assertEqual(health(ch), grpc.StatusCode.UNAVAILABLE, cert)
            with self.assertRaises((ssl.SSLError, ConnectionError), msg=cert):
                https(self.server.http_port, "/metrics", cert=cert)

    def test_cli(self):
        good = ["--server", self.server.address, "--tls-ca-file", PKI["ca.pem"]]
        code, out, err = cli("health", *good, "--tls-cert-file", PKI["client.pem"],
                             "--tls-key-file", PKI["client.key"])
        self.assertEqual((code, out.splitlines()[0]), (0, "SERVING"), err)
        code, out, err = cli("certify", "--holdout-error-count", "0", "--holdout-sample-count",
                             "300", *good, "--tls-cert-file", PKI["client.pem"],
                             "--tls-key-file", PKI["client.key"], "--output", "json")
        self.assertEqual(code, 0, err)
        for cert in ("other-client", "expired-client"):
            code, _, err = cli("health", *good, "--tls-cert-file", PKI[cert + ".pem"],
                               "--tls-key-file", PKI[cert + ".key"])
            self.assertEqual(code, 4, (cert, err))
        code, _, err = cli("health", *good)
        self.assertEqual(code, 4, err)
        code, _, err = cli("health", *good, "--tls-cert-file", PKI["client.pem"])
        self.assertEqual(code, 2, err)
        self.assertIn("--tls-key-file", err)


class TokenTest(unittest.TestCase):
    """Bearer tokens on a plaintext loopback server (the token logic does not
    depend on the transport; TlsTest sends them over TLS)."""

    def setUp(self):
        self.dir = tempfile.mkdtemp(prefix="riskbound-sec-")
        self.tokens = os.path.join(self.dir, "tokens")
        write_tokens(self.tokens, TOKEN_A)
        self.server = start("--auth-token-file", self.tokens, plaintext=True)
        self.channel = grpc.insecure_channel(self.server.address)

    def tearDown(self):
        self.channel.close()
        self.assertEqual(self.server.stop(), 0)
        shutil.rmtree(self.dir, ignore_errors=True)

    def test_missing_wrong_or_other_scheme_get_one_answer(self):
        refused = [call_certify(self.channel),
                   call_certify(self.channel, token=WRONG),
                   call_certify(self.channel, token=""),
                   call_certify(self.channel, header=f"Basic {TOKEN_A}"),
                   call_certify(self.channel, header=TOKEN_A)]
        codes = {code for code, _, _ in refused}
        messages = {details for _, details, _ in refused}
        self.assertEqual(codes, {grpc.StatusCode.UNAUTHENTICATED})
        self.assertEqual(len(messages), 1, messages)
        code, details, answer = call_certify(self.channel, token=TOKEN_A)
        self.assertEqual(code, grpc.StatusCode.OK, details)
        self.assertAlmostEqual(answer.tightest.risk_upper_bound, ZERO_OF_300_AT_5_PERCENT,
                               places=9)
        # The scheme is case-insensitive (RFC 7235, section 2.1).
        code, _, _ = call_certify(self.channel, header=f"bearer {TOKEN_A}")
        self.assertEqual(code, grpc.StatusCode.OK)
        # Counted: five refusals, as calls and as refusals.
        port = self.server.http_port
        self.assertEqual(metric(port, "riskbound_calls_refused_total",
                                'reason="unauthenticated"', token=TOKEN_A, tls=False), 5)
        self.assertEqual(metric(port, "riskbound_calls_total",
                                'transport="grpc",rpc="Certify",code="UNAUTHENTICATED"',
                                token=TOKEN_A, tls=False), 5)

    def test_registry_stream_needs_the_token_too(self):
        stub = service_grpc.RiskBoundStub(self.channel)
        record = registry_pb.RegistryRecord(record_id="r", model_name="m", model_version="1")
        record.evidence.holdout.error_count = 0
        record.evidence.holdout.sample_count = 300
        settings = registry_pb.ScoreSettings(
            certify=registry_pb.CertifySettings(failure_probability=0.05))
        messages = [registry_pb.ScoreRegistryRequest(settings=settings),
                    registry_pb.ScoreRegistryRequest(record=record)]
        with self.assertRaises(grpc.RpcError) as refused:
            list(stub.ScoreRegistry(iter(messages), timeout=20,
                                    metadata=[("authorization", f"Bearer {WRONG}")]))
        self.assertEqual(refused.exception.code(), grpc.StatusCode.UNAUTHENTICATED)
        self.assertEqual(refused.exception.details(), call_certify(self.channel)[1])
        answers = list(stub.ScoreRegistry(iter(messages), timeout=20,
                                          metadata=[("authorization", f"Bearer {TOKEN_A}")]))
        self.assertEqual(len(answers), 2)
        self.assertAlmostEqual(answers[0].result.certified.tightest.risk_upper_bound,
                               ZERO_OF_300_AT_5_PERCENT, places=9)
        self.assertTrue(answers[1].HasField("summary"))

    def test_health_stays_open(self):
        self.assertEqual(health(self.channel), SERVING)
        code, out, err = cli("health", "--server", self.server.address)
        self.assertEqual((code, out.splitlines()[0]), (0, "SERVING"), err)

    def test_http_port_needs_the_token_too(self):
        port = self.server.http_port
        answers = [plain_http(port, "/v1/Certify"), plain_http(port, "/v1/Certify", WRONG),
                   plain_http(port, "/metrics"), plain_http(port, "/metrics", WRONG)]
        self.assertEqual({status for status, _ in answers}, {401})
        bodies = {body for _, body in answers}
        self.assertEqual(len(bodies), 1)
        self.assertEqual(json.loads(bodies.pop())["code"], 16)  # UNAUTHENTICATED
        status, body = plain_http(port, "/v1/Certify", TOKEN_A)
        self.assertEqual(status, 200, body)
        status, _ = plain_http(port, "/metrics", TOKEN_A)
        self.assertEqual(status, 200)
        # The gRPC refusal says the same.
        _, details, _ = call_certify(self.channel)
        self.assertEqual(json.loads(answers[0][1])["message"], details)

    def test_sighup_rotates_the_tokens(self):
        # Rotation: first both tokens, then only the new one.
        write_tokens(self.tokens, TOKEN_A, TOKEN_B)
        self.reload(expect="2 bearer token(s)")
        self.assertEqual(call_certify(self.channel, token=TOKEN_A)[0], grpc.StatusCode.OK)
        self.assertEqual(call_certify(self.channel, token=TOKEN_B)[0], grpc.StatusCode.OK)
        write_tokens(self.tokens, TOKEN_B)
        self.reload(expect="1 bearer token(s)")
        self.assertEqual(call_certify(self.channel, token=TOKEN_A)[0],
                         grpc.StatusCode.UNAUTHENTICATED)
        self.assertEqual(call_certify(self.channel, token=TOKEN_B)[0], grpc.StatusCode.OK)
        # A broken file keeps the tokens in force.
        write_tokens(self.tokens, "short")
        self.reload(expect="stay in force")
        self.assertEqual(call_certify(self.channel, token=TOKEN_B)[0], grpc.StatusCode.OK)

    def test_cli_sends_the_token_from_a_file_or_the_environment(self):
        args = ["certify", "--holdout-error-count", "0", "--holdout-sample-count", "300",
                "--server", self.server.address]
        code, _, err = cli(*args, "--auth-token-file", self.tokens)
        self.assertEqual(code, 0, err)
        code, _, err = cli(*args, env={"RISKBOUND_AUTH_TOKEN": TOKEN_A})
        self.assertEqual(code, 0, err)
        code, _, err = cli(*args)
        self.assertEqual(code, 8)
        self.assertIn("refused the credentials", err)
        self.assertIn("--auth-token-file", err)
        code, _, err = cli(*args, env={"RISKBOUND_AUTH_TOKEN": WRONG})
        self.assertEqual(code, 8)
        self.assertNotIn(WRONG, err)
        # A token is never sent in plaintext off loopback.
        code, _, err = cli("health", "--server", "192.0.2.1:50051", "--plaintext",
                           env={"RISKBOUND_AUTH_TOKEN": TOKEN_A})
        self.assertEqual(code, 2)
        self.assertNotIn(TOKEN_A, err)

    def test_tokens_never_reach_the_log(self):
        call_certify(self.channel, token=TOKEN_A)
        call_certify(self.channel, token=WRONG)
        plain_http(self.server.http_port, "/v1/Certify", WRONG)
        plain_http(self.server.http_port, "/v1/Certify", TOKEN_A)
        write_tokens(self.tokens, TOKEN_B)
        self.reload(expect="1 bearer token(s)")
        call_certify(self.channel, token=TOKEN_B)
        logs = self.server.logs()
        self.assertIn('"message":"call"', logs)  # debug level: one line per call
        for secret in (TOKEN_A, TOKEN_B, WRONG, TOKEN_A[:12], TOKEN_B[-12:]):
            self.assertNotIn(secret, logs)

    def reload(self, expect):
        before = self.server.logs().count("SIGHUP received")
        self.server.signal(signal.SIGHUP)
        deadline = time.monotonic() + 10
        while True:
            lines = [l for l in self.server.logs().splitlines() if "SIGHUP received" in l]
            if len(lines) > before:
                self.assertIn(expect, lines[-1])
                return
            self.assertLess(time.monotonic(), deadline, "no SIGHUP line in the log")
            time.sleep(0.02)


if __name__ == "__main__":
    run_module_tests("--cli")
