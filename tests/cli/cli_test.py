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
    # --help, -h and --version need no server.
    return harness.run_cli(*args, stdin=stdin,
                           server=bool(args) and args[0] not in ("--help", "-h", "--version")
                           and "-h" not in args and "--version" not in args)


class NewEvidenceKindsTest(unittest.TestCase):
    """The evidence kinds beyond 0-1 counts, end to end through the CLI."""

    def certify_json(self, *args):
        code, out, err = cli("certify", *args, "--output", "json")
        self.assertEqual(code, 0, err)
        return json.loads(out)

    def test_pac_bayes_kl(self):
        # Source: Seeger (2002) / Maurer (2004) PAC-Bayes kl bound, evaluated
        # independently in Python (kl inverse by bisection): m = 1e4, KL = 500,
        # Gibbs empirical risk 0.03, delta = 0.05 -> 0.117601.
        doc = self.certify_json("--kl-divergence", "500", "--gibbs-risk", "0.03",
                                "--pac-samples", "10000", "--family", "pac-bayes-kl")
        self.assertAlmostEqual(doc["tightest"]["riskUpperBound"], 0.117601, places=6)
        # Majority vote: twice the Gibbs bound (Langford & Shawe-Taylor 2002).
        doc = self.certify_json("--kl-divergence", "500", "--gibbs-risk", "0.03",
                                "--pac-samples", "10000", "--family", "pac-bayes-kl",
                                "--bound-target", "majority-vote")
        self.assertAlmostEqual(doc["tightest"]["riskUpperBound"], 2 * 0.117601, places=5)

    def test_sample_compression(self):
        # Source: Langford (2005) sample compression bound (binomial-tail form),
        # inverted independently in Python in log space: m = 10000, d = 300
        # support vectors, k = 0 -> 0.130451.
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
        # 1 - 0.05^(1/300) = 0.009936 (scipy.stats.beta.isf(0.05, 1, 300)).
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
        # Source: Vapnik (1998) / Burges (1998) eq. (3), evaluated independently
        # in Python: R_emp = 0.05, h = 100, m = 10000, delta = 0.05 -> 0.301936
        # (with the conservative +1/m, Vapnik 1998 Thm 4.1, from memory).
        code, out, err = cli("certify", "--train-errors", "500", "--train-samples", "10000",
                             "--vc-dimension", "100", "--family", "vc-additive", "--output", "json")
        self.assertEqual(code, 0, err)
        self.assertAlmostEqual(json.loads(out)["tightest"]["riskUpperBound"], 0.301936, places=6)
        # Source: Langford (2005) Occam kl bound, evaluated independently in
        # Python: |H| = 1e6, m = 5000, R_emp = 0.05 -> 0.069910.
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
        # Source: the kl-Chernoff upper limit (Langford 2005), n = 1000, k = 20,
        # delta = 0.05: kl(0.02 || q) = ln(20)/1000 solved with
        # scipy.optimize.brentq gives q = 0.0328132.
        self.assertAlmostEqual(json.loads(out)["tightest"]["riskUpperBound"], 0.032813, places=6)
        with tempfile.NamedTemporaryFile("w", suffix=".json", delete=False) as f:
            json.dump(request, f)
        code, out, err = cli("certify", "--input", f.name)
        self.assertEqual(code, 0, err)
        self.assertIn("holdout-kl", out)
        # Connection flags go with --input (they are no field of the request):
        # the compose file's one-shot client says --plaintext to a non-loopback
        # server name.
        code, out, err = cli("certify", "--input", f.name, "--plaintext", "--timeout", "5")
        self.assertEqual(code, 0, err)
        code, out, err = cli("certify", "--input", f.name, "--errors", "3")
        self.assertEqual(code, 2)
        self.assertIn("--input excludes --holdout-error-count", err)

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
        self.assertIn("--failure-probability D", out)
        self.assertIn("(also --delta)", out)
        code, short, _ = cli("certify", "-h")
        self.assertEqual(code, 0)
        self.assertEqual(short, out)
        code, out, err = cli("families")
        self.assertEqual(code, 0, err)
        self.assertIn("Clopper & Pearson (1934)", out)
        self.assertIn("holdout-kl  (BOUND_FAMILY_HOLDOUT_KL_CHERNOFF)", out)


class OutwardRoundingTest(unittest.TestCase):
    """Issue 12 item 1: what the table prints claims no more than was proven."""

    def test_zero_errors_in_1500_prints_0_001996(self):
        # Source: Clopper & Pearson 1934, closed form for k = 0:
        # 1 - 0.05^(1/1500) = 0.0019951618622789857; scipy.stats.beta.ppf(0.95, 1, 1500)
        # through /usr/bin/python3 gives the same to 15 digits.
        from scipy.stats import beta
        exact = beta.ppf(0.95, 1, 1500)
        self.assertEqual(harness.up6(exact), "0.001996")
        code, out, err = cli("certify", "--errors", "0", "--samples", "1500")
        self.assertEqual(code, 0, err)
        self.assertIn("Tightest: holdout-binomial: true error <= 0.001996 with probability >= 0.95",
                      out)
        self.assertNotIn("0.001995 ", out.split("Tightest")[1].splitlines()[0])
        row = [l for l in out.splitlines() if l.startswith("holdout-binomial")][0].split()
        self.assertEqual(row[1], "0.001996")

    def test_every_table_cell_is_rounded_outward(self):
        args = ("certify", "--errors", "37", "--samples", "1300", "--family", "all")
        code, out, err = cli(*args, "--output", "json")
        self.assertEqual(code, 0, err)
        doc = json.loads(out)
        code, table, err = cli(*args)
        self.assertEqual(code, 0, err)
        rows = {l.split()[0]: l.split() for l in table.splitlines()
                if l.split() and l.split()[0] in {c["familyName"] for c in doc["certificates"]}}
        self.assertEqual(len(rows), len(doc["certificates"]))
        for c in doc["certificates"]:
            row = rows[c["familyName"]]
            self.assertEqual(row[1], harness.up6(c["riskUpperBound"]), row)
            if "riskLowerBound" in c:
                self.assertEqual(row[2], harness.down6(c["riskLowerBound"]), row)
            self.assertEqual(row[4], harness.up6(c["penalty"]), row)
            self.assertEqual(row[5], harness.up_sig(c["failureProbability"]), row)

    def test_tiny_delta_never_reads_as_certainty(self):
        code, out, err = cli("certify", "--errors", "0", "--samples", "100000",
                             "--failure-probability", "1e-9")
        self.assertEqual(code, 0, err)
        self.assertIn("with probability >= 0.999999999", out)
        self.assertIn("confidence >= 0.999999999, delta = 1e-09", out)
        self.assertNotIn(">= 1 ", out)
        self.assertNotIn("100%", out)
        # Many families at 1e-9: whatever the server spends, the confidence
        # printed is below 1 - spent (rounded down), never 1.
        code, out, err = cli("certify", "--errors", "0", "--samples", "100000",
                             "--failure-probability", "1e-9", "--family", "all")
        self.assertEqual(code, 0, err)
        line = [l for l in out.splitlines() if l.startswith("Tightest")][0]
        printed = line.split("probability >= ")[1].split()[0]
        self.assertTrue(printed.startswith("0.99999999"), line)
        self.assertLessEqual(float(printed), 1 - 1e-9)


class OneSpellingTest(unittest.TestCase):
    """Issue 11: each flag named after its wire field; old spellings are aliases;
    families and model kinds by CLI word or enum name."""

    def json_of(self, *args):
        code, out, err = cli("certify", *args, "--output", "json")
        self.assertEqual(code, 0, (args, err))
        return json.loads(out)

    def test_wire_names_and_aliases_give_the_same_answer(self):
        new = self.json_of("--holdout-error-count", "7", "--holdout-sample-count", "900",
                           "--failure-probability", "0.01", "--families", "holdout-kl")
        old = self.json_of("--errors", "7", "--samples", "900", "--delta", "0.01",
                           "--family", "holdout-kl")
        self.assertEqual(new["tightest"]["riskUpperBound"], old["tightest"]["riskUpperBound"])
        self.assertEqual(new["deltaAccounting"]["requestedFailureProbability"], 0.01)
        # Source: kl (Chernoff) inversion, Langford 2005: independently by
        # bisection of n kl(7/900 || p) = ln(1/0.01) (brute force, Python).
        import math
        def kl(q, p):
            return q * math.log(q / p) + (1 - q) * math.log((1 - q) / (1 - p))
        lo, hi = 7 / 900, 1.0 - 1e-15
        for _ in range(200):
            mid = (lo + hi) / 2
            lo, hi = (mid, hi) if 900 * kl(7 / 900, mid) <= math.log(1 / 0.01) else (lo, mid)
        self.assertAlmostEqual(new["tightest"]["riskUpperBound"], hi, places=9)

    def test_alias_and_name_together_is_a_usage_error(self):
        code, _, err = cli("certify", "--errors", "1", "--holdout-error-count", "1",
                           "--samples", "10")
        self.assertEqual(code, 2)
        self.assertIn("--holdout-error-count given twice", err)

    def test_families_by_word_and_enum_name(self):
        for name in ("holdout-kl", "BOUND_FAMILY_HOLDOUT_KL_CHERNOFF", "HOLDOUT_KL_CHERNOFF",
                     "holdout_kl_chernoff", "holdout-kl-chernoff"):
            doc = self.json_of("--errors", "3", "--samples", "400", "--families", name)
            self.assertEqual([c["family"] for c in doc["certificates"]],
                             ["BOUND_FAMILY_HOLDOUT_KL_CHERNOFF"], name)
        code, _, err = cli("certify", "--errors", "3", "--samples", "400", "--family", "kl")
        self.assertEqual(code, 2)
        self.assertIn("unknown family 'kl'", err)
        self.assertIn("holdout-binomial", err)

    def test_json_files_take_every_spelling(self):
        for name in ("holdout-kl", "BOUND_FAMILY_HOLDOUT_KL_CHERNOFF", "holdout_kl_chernoff",
                     "HOLDOUT_KL_CHERNOFF"):
            request = {"evidence": {"holdout": {"errorCount": "20", "sampleCount": "1000"}},
                       "failureProbability": 0.05, "listed": {"families": [name]}}
            code, out, err = cli("certify", "--input", "-", "--output", "json",
                                 stdin=json.dumps(request))
            self.assertEqual(code, 0, (name, err))
            doc = json.loads(out)
            self.assertEqual(doc["certificates"][0]["family"], "BOUND_FAMILY_HOLDOUT_KL_CHERNOFF")
            # Source: the kl-Chernoff upper limit (Langford 2005), n = 1000, k = 20,
        # delta = 0.05: kl(0.02 || q) = ln(20)/1000 solved with
        # scipy.optimize.brentq gives q = 0.0328132.
            self.assertAlmostEqual(doc["tightest"]["riskUpperBound"], 0.032813, places=6)
        # A model kind by its CLI word inside a file; an id that happens to be a
        # family word is left alone.
        request = {"failureProbability": 0.05,
                   "evidence": {"training": {"errorCount": "10", "sampleCount": "5000",
                                             "capacity": {"model": {"kind": "halfspace",
                                                                    "dimension": "9"}}}}}
        code, out, err = cli("certify", "--input", "-", "--output", "json",
                             stdin=json.dumps(request))
        self.assertEqual(code, 0, err)
        self.assertIn("vc-additive", {c["familyName"] for c in json.loads(out)["certificates"]})
        code, _, err = cli("certify", "--input", "-",
                           stdin=json.dumps({"evidence": {"holdout": {"errorCount": 1,
                                                                      "sampleCount": 10}},
                                             "listed": {"families": ["no-such"]}}))
        self.assertEqual(code, 3)
        self.assertIn("no-such", err)

    def test_bounded_loss_heading_names_the_loss(self):
        code, out, err = cli("certify", "--mean-loss", "0.3", "--loss-sample-count", "800",
                             "--loss-range", "0,2", "--families", "bounded-hoeffding")
        self.assertEqual(code, 0, err)
        self.assertNotIn("Certificates on the true error", out)
        self.assertTrue(out.startswith("Upper bounds on the expected loss, in the loss's units"), out)
        self.assertIn("expected loss <=", out)

    def test_version_everywhere(self):
        code, families, err = cli("families", "--output", "json")
        self.assertEqual(code, 0, err)
        doc = json.loads(families)
        version = doc["engineVersion"]
        self.assertTrue(version)
        for args in (("--version",), ("certify", "--version"), ("gate", "--version"),
                     ("plan", "--version"), ("health", "--version")):
            code, out, err = cli(*args)
            self.assertEqual(code, 0, (args, err))
            self.assertEqual(out, f"riskbound {version}\n", args)

    def test_families_json(self):
        code, out, err = cli("families", "--output", "json")
        self.assertEqual(code, 0, err)
        doc = json.loads(out)
        by_name = {f["familyName"]: f for f in doc["families"]}
        self.assertEqual(by_name["holdout-kl"]["family"], "BOUND_FAMILY_HOLDOUT_KL_CHERNOFF")
        self.assertIn("Clopper", by_name["holdout-binomial"]["source"])
        # Every value of the enum but UNSPECIFIED, each once: the family
        # table is riskbound.v1.BoundFamily (proto/riskbound/v1/common.proto).
        import re
        with open(harness.PROTO_COMMON) as f:
            values = set(re.findall(r"^\s*(BOUND_FAMILY_\w+) = ", f.read(), re.M))
        values.discard("BOUND_FAMILY_UNSPECIFIED")
        self.assertEqual({f["family"] for f in doc["families"]}, values)
        self.assertEqual(len(doc["families"]), len(values))

    def test_terms_are_explained_in_help(self):
        code, out, _ = cli("certify", "--help")
        self.assertEqual(code, 0)
        terms = out.split("terms:")[1]
        for word in ("upper", "lower", "empirical", "penalty", "delta used", "union bound",
                     "vacuous", "tightest", "capacity", "failure probability"):
            self.assertIn(word, terms)


if __name__ == "__main__":
    harness.main()
