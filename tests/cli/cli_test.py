#!/usr/bin/python3
"""End-to-end tests of the riskbound CLI against a live riskbound-server.

The server runs on an ephemeral loopback port; each test runs the CLI binary
as a pipeline would and checks stdout, stderr and the exit code.
"""
import json
import subprocess
import tempfile
import unittest

import harness


def cli(*args, stdin=None):
    # `riskbound families` and --help need no server.
    return harness.run_cli(*args, stdin=stdin,
                           server=bool(args) and args[0] not in ("--help", "families"))


class NewEvidenceKindsTest(unittest.TestCase):
    """The evidence kinds beyond 0-1 counts, end to end through the CLI."""

    def certify_json(self, *args):
        code, out, err = cli("certify", *args, "--output", "json")
        self.assertEqual(code, 0, err)
        return json.loads(out)

    def test_pac_bayes_kl(self):
        # Source: formula sheet row 5.3 (check_formulas.py): m = 1e4, KL = 500,
        # Gibbs empirical risk 0.03, delta = 0.05 -> Maurer/Seeger kl 0.117601.
        doc = self.certify_json("--kl-divergence", "500", "--gibbs-risk", "0.03",
                                "--pac-samples", "10000", "--family", "pac-bayes-kl")
        self.assertAlmostEqual(doc["tightest"]["riskUpperBound"], 0.117601, places=6)
        # Majority vote: twice the Gibbs bound (Langford & Shawe-Taylor 2002).
        doc = self.certify_json("--kl-divergence", "500", "--gibbs-risk", "0.03",
                                "--pac-samples", "10000", "--family", "pac-bayes-kl",
                                "--bound-target", "majority-vote")
        self.assertAlmostEqual(doc["tightest"]["riskUpperBound"], 2 * 0.117601, places=5)

    def test_sample_compression(self):
        # Source: formula sheet row 7.1: m = 10000, d = 300 support vectors,
        # k = 0 -> 0.130451 (binomial-tail form, Langford 2005).
        doc = self.certify_json("--compression-size", "300", "--compression-samples", "10000",
                                "--outside-errors", "0")
        self.assertEqual(doc["tightest"]["familyName"], "sample-compression")
        self.assertAlmostEqual(doc["tightest"]["riskUpperBound"], 0.130451, places=6)

    def test_bounded_loss_hoeffding(self):
        # Source: Hoeffding (1963): mean + (b - a) sqrt(ln(1/delta) / (2n)) for
        # losses in [a, b]; here [0, 2], n = 800, delta = 0.05.
        import math
        doc = self.certify_json("--mean-loss", "0.3", "--loss-variance", "0.04",
                                "--loss-samples", "800", "--loss-range", "0,2",
                                "--family", "bounded-hoeffding")
        want = 0.3 + 2 * math.sqrt(math.log(1 / 0.05) / 1600)
        self.assertAlmostEqual(doc["tightest"]["riskUpperBound"], want, places=9)

    def test_all_applicable_over_every_kind(self):
        doc = self.certify_json("--errors", "20", "--samples", "1000",
                                "--kl-divergence", "5", "--gibbs-risk", "0.02", "--pac-samples", "5000",
                                "--family", "all")
        names = {c["familyName"] for c in doc["certificates"]}
        self.assertTrue({"holdout-binomial", "pac-bayes-kl", "pac-bayes-catoni"} <= names, names)
        k = len(doc["certificates"])
        self.assertEqual(doc["deltaAccounting"]["familyCount"], k)
        for c in doc["certificates"]:
            self.assertAlmostEqual(c["failureProbability"], 0.05 / k, places=15)

    def test_flag_groups_are_checked(self):
        for args in (("--kl-divergence", "5"), ("--mean-loss", "0.2"),
                     ("--compression-size", "3", "--compression-samples", "10"),
                     ("--rademacher", "0.1"), ("--loss-range", "0,1")):
            code, _, err = cli("certify", *args)
            self.assertEqual(code, 2, (args, err))
        code, _, err = cli("certify", "--kl-divergence", "-1", "--gibbs-risk", "0.1",
                           "--pac-samples", "100")
        self.assertEqual(code, 3, err)
        self.assertIn("evidence.pac_bayes.kl_divergence", err)


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
        port = harness.free_port_nobody_listens_on()
        p = subprocess.run([harness.ARGS.cli, "certify", "--errors", "1", "--samples", "10",
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


if __name__ == "__main__":
    harness.main()
