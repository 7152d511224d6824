#!/usr/bin/python3
"""End-to-end tests of the riskbound CLI against a live riskbound-server.

The server runs on an ephemeral loopback port; each test runs the CLI binary
as a pipeline would and checks stdout, stderr and the exit code.
"""
import argparse
import json
import os
import signal
import socket
import subprocess
import sys
import tempfile
import time
import unittest

ARGS = None
SERVER = None


def start_server(binary):
    d = tempfile.mkdtemp(prefix="riskbound-cli-")
    port_file = os.path.join(d, "port")
    proc = subprocess.Popen([binary, "--listen", "127.0.0.1:0", "--port_file", port_file],
                            stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    deadline = time.monotonic() + 30
    while not os.path.exists(port_file):
        if proc.poll() is not None or time.monotonic() > deadline:
            raise RuntimeError("server did not start")
        time.sleep(0.05)
    with open(port_file) as f:
        return proc, f"127.0.0.1:{int(f.read())}"


def free_port_nobody_listens_on():
    s = socket.socket()
    s.bind(("127.0.0.1", 0))
    port = s.getsockname()[1]
    s.close()
    return port


def cli(*args, stdin=None, server=True):
    cmd = [ARGS.cli] + list(args)
    if server and args and args[0] not in ("--help", "families") and "--help" not in args:
        cmd += ["--server", SERVER[1]]
    p = subprocess.run(cmd, input=stdin, capture_output=True, text=True, timeout=60)
    return p.returncode, p.stdout, p.stderr


class CertifyCommandTest(unittest.TestCase):
    def test_acceptance_value_json(self):
        # Source: rule of three, Hanley & Lippman-Hand (1983); exact binomial
        # 1 - 0.05^(1/300) = 0.009936 (formula sheet row 4.5).
        code, out, err = cli("certify", "--errors", "0", "--samples", "300", "--delta", "0.05",
                             "--output", "json")
        self.assertEqual(code, 0, err)
        doc = json.loads(out)
        cert = doc["certificates"][0]
        self.assertEqual(cert["family"], "BOUND_FAMILY_HOLDOUT_EXACT_BINOMIAL")
        self.assertEqual(f"{cert['riskUpperBound']:.6f}", "0.009936")
        self.assertEqual(doc["tightest"]["familyName"], "holdout-binomial")

    def test_table_for_people(self):
        code, out, err = cli("certify", "--errors", "3", "--samples", "1200", "--delta", "0.05",
                             "--family", "all")
        self.assertEqual(code, 0, err)
        for word in ("family", "upper", "delta used", "vacuous", "holdout-binomial",
                     "holdout-hoeffding", "holdout-kl", "Tightest:", "union bound over 3 families",
                     "Cautions:", "distribution shift"):
            self.assertIn(word, out)

    def test_training_evidence_families(self):
        # Source: formula sheet row 1.2: R_emp = 0.05, h = 100, m = 10000,
        # delta = 0.05 -> 0.301936 (with the conservative +1/m).
        code, out, err = cli("certify", "--train-errors", "500", "--train-samples", "10000",
                             "--vc-dimension", "100", "--family", "vc-additive", "--output", "json")
        self.assertEqual(code, 0, err)
        self.assertAlmostEqual(json.loads(out)["tightest"]["riskUpperBound"], 0.301936, places=6)
        # Source: formula sheet row 3.3: |H| = 1e6, m = 5000, R_emp = 0.05 -> 0.069910.
        code, out, err = cli("certify", "--train-errors", "250", "--train-samples", "5000",
                             "--hypothesis-count", "1000000", "--output", "json")
        self.assertEqual(code, 0, err)
        doc = json.loads(out)
        self.assertEqual(doc["tightest"]["familyName"], "occam-kl")
        self.assertAlmostEqual(doc["tightest"]["riskUpperBound"], 0.069910, places=6)

    def test_input_file_and_stdin(self):
        request = {"evidence": {"holdout": {"errorCount": "20", "sampleCount": "1000"}},
                   "failure_probability": 0.05, "listed": {"families": ["BOUND_FAMILY_HOLDOUT_KL_CHERNOFF"]}}
        code, out, err = cli("certify", "--input", "-", "--output", "json", stdin=json.dumps(request))
        self.assertEqual(code, 0, err)
        # Source: formula sheet row 4.3: n = 1000, k = 20 -> kl 0.032813.
        self.assertAlmostEqual(json.loads(out)["tightest"]["riskUpperBound"], 0.032813, places=6)
        with tempfile.NamedTemporaryFile("w", suffix=".json", delete=False) as f:
            json.dump(request, f)
        code, out, err = cli("certify", "--input", f.name)
        self.assertEqual(code, 0, err)
        self.assertIn("holdout-kl", out)

    def test_exit_code_invalid_input(self):
        code, out, err = cli("certify", "--errors", "5", "--samples", "3")
        self.assertEqual(code, 3)
        self.assertIn("evidence.holdout.error_count", err)
        self.assertEqual(out, "")
        code, _, err = cli("certify", "--errors", "1", "--samples", "10", "--delta", "2")
        self.assertEqual(code, 3)
        self.assertIn("failure_probability", err)
        # A typo'd field in a JSON request names the field.
        code, _, err = cli("certify", "--input", "-",
                           stdin='{"evidence": {"holdout": {"errorCont": 1, "sampleCount": 10}}}')
        self.assertEqual(code, 3)
        self.assertIn("errorCont", err)
        code, _, err = cli("certify", "--input", "/nonexistent/request.json")
        self.assertEqual(code, 3)
        self.assertIn("/nonexistent/request.json", err)

    def test_exit_code_usage(self):
        for args in (("certify", "--errors", "1"),
                     ("certify", "--errors", "x", "--samples", "3"),
                     ("certify", "--bogus"),
                     ("certify", "--errors", "1", "--samples", "9", "--family", "no-such"),
                     ("certify", "--errors", "1", "--samples", "9", "--output", "xml"),
                     ("no-such-command",)):
            code, out, err = cli(*args)
            self.assertEqual(code, 2, args)
            self.assertTrue(err.startswith("riskbound"), err)
        code, out, _ = cli()
        self.assertEqual(code, 2)

    def test_exit_code_unreachable(self):
        port = free_port_nobody_listens_on()
        p = subprocess.run([ARGS.cli, "certify", "--errors", "1", "--samples", "10",
                            "--server", f"127.0.0.1:{port}", "--timeout", "2"],
                           capture_output=True, text=True, timeout=60)
        self.assertEqual(p.returncode, 4)
        self.assertIn("cannot reach the server", p.stderr)

    def test_help_and_families(self):
        code, out, _ = cli("--help")
        self.assertEqual(code, 0)
        self.assertIn("exit codes", out)
        code, out, _ = cli("certify", "--help")
        self.assertEqual(code, 0)
        self.assertIn("--delta", out)
        code, out, _ = cli("families")
        self.assertEqual(code, 0)
        self.assertIn("Clopper & Pearson (1934)", out)


def main():
    global ARGS, SERVER
    parser = argparse.ArgumentParser()
    parser.add_argument("--server", required=True)
    parser.add_argument("--cli", required=True)
    ARGS, rest = parser.parse_known_args()
    SERVER = start_server(ARGS.server)
    try:
        result = unittest.main(argv=[sys.argv[0]] + rest, verbosity=2, exit=False).result
    finally:
        SERVER[0].send_signal(signal.SIGTERM)
        SERVER[0].wait(timeout=30)
    sys.exit(0 if result.wasSuccessful() else 1)


if __name__ == "__main__":
    main()
