#!/usr/bin/python3
"""End-to-end tests of `riskbound select` and `riskbound plan` against a live
riskbound-server: tables, JSON, the SVG plot, values against outside sources,
and every exit code the two commands document.

The server runs on an ephemeral loopback port; each test runs the CLI binary
as a pipeline would and checks stdout, stderr and the exit code.
"""
import csv
import json
import math
import os
import subprocess
import tempfile
import unittest

import xml.etree.ElementTree as ET

import harness

HERE = os.path.dirname(os.path.abspath(__file__))
# The demo structure (an invented parcel company's nested models).
STRUCTURE = os.path.normpath(os.path.join(HERE, "..", "..", "examples", "fernhill",
                                          "structure.json"))
FIXTURES = os.path.normpath(os.path.join(HERE, "..", "reference", "fixtures"))
# Route-delay trees ranked by fitted effective VC dimensions (heuristic mode).
FITTED = os.path.normpath(os.path.join(HERE, "..", "..", "examples", "fernhill", "requests",
                                       "route-trees-fitted-structure.json"))
SVG = "{http://www.w3.org/2000/svg}"


def cli(*args, stdin=None, server=True):
    return harness.run_cli(*args, stdin=stdin, server=server, timeout=120)


def vc_bound(errors, m, h, eta):
    """Vapnik's additive bound, conservative form (+1/m), written out from
    Vapnik (1998) Ch. 4 and Burges (1998) eq. 3 (+1/m: Vapnik 1998 Thm 4.1,
    from memory)."""
    conf = math.sqrt((h * (math.log(2 * m / h) + 1) - math.log(eta / 4)) / m) + 1 / m
    return min(1.0, errors / m + conf)


def points(polyline):
    return [tuple(float(v) for v in p.split(",")) for p in polyline.get("points").split()]


class SelectCommandTest(unittest.TestCase):
    def test_demo_structure_table_and_plot(self):
        with open(STRUCTURE) as f:
            structure = json.load(f)
        with tempfile.TemporaryDirectory() as d:
            plot = os.path.join(d, "srm.svg")
            code, out, err = cli("select", "--input", STRUCTURE, "--plot", plot)
            self.assertEqual(code, 0, err)
            tree = ET.parse(plot)  # the SVG is well-formed XML
        for word in ("candidate", "VC dim h", "empirical", "penalty", "bound", "delta used",
                     "Chosen (*): late-lin-59f", "Not fragile", "6/(pi^2 k^2)", "Cautions:",
                     "distribution shift", "Plot written to"):
            self.assertIn(word, out)
        starred = [line for line in out.splitlines() if line.startswith("*")]
        self.assertEqual(len(starred), 1)
        self.assertIn("late-lin-59f", starred[0])

        # Source: Vapnik (1998) and SRM weights 6/(pi^2 k^2) (sum 1/k^2 = pi^2/6),
        # computed here: the bound of every candidate; the chosen one is the
        # interior minimum, not the largest class.
        bounds = []
        for k, c in enumerate(structure["structure"], start=1):
            eta = structure["failure_probability"] * 6 / (math.pi ** 2 * k * k)
            bounds.append(vc_bound(c["error_count"], c["sample_count"],
                                   c["capacity"]["vc_dimension"], eta))
        chosen = bounds.index(min(bounds))
        self.assertEqual(structure["structure"][chosen]["id"], "late-lin-59f")
        self.assertTrue(0 < chosen < len(bounds) - 1)
        self.assertIn(harness.up6(bounds[chosen]), starred[0])  # rounded up
        # Positions are the wire's, counted from 0: structure[chosen] = chosenIndex.
        self.assertEqual(starred[0].split()[1], f"structure[{chosen}]")
        self.assertIn(f"Chosen (*): late-lin-59f (structure[{chosen}])", out)

        root = tree.getroot()
        self.assertEqual(root.tag, SVG + "svg")
        polylines = root.findall(f".//{SVG}polyline")
        self.assertEqual(len(polylines), 3)
        classes = sorted(p.get("class") for p in polylines)
        self.assertEqual(classes, ["curve-bound", "curve-empirical", "curve-penalty"])
        for p in polylines:
            self.assertEqual(len(points(p)), 6)
        bound_line = next(p for p in polylines if p.get("class") == "curve-bound")
        marker = root.find(f".//{SVG}circle[@id='chosen-marker']")
        self.assertIsNotNone(marker)
        bx, by = points(bound_line)[chosen]
        self.assertAlmostEqual(float(marker.get("cx")), bx, places=2)
        self.assertAlmostEqual(float(marker.get("cy")), by, places=2)
        # The lowest point of the bound curve is the chosen one (SVG y grows downward).
        self.assertEqual(max(points(bound_line), key=lambda xy: xy[1]), (bx, by))
        texts = " ".join("".join(t.itertext()) for t in root.iter(f"{SVG}text"))
        for word in ("Structural risk minimization", "capacity: VC dimension h", "log scale",
                     "risk", "empirical risk", "capacity penalty", "bound = empirical + penalty",
                     "chosen: late-lin-59f"):
            self.assertIn(word, texts)
        self.assertIsNotNone(root.find(f"{SVG}title"))
        # Tick labels on both axes.
        self.assertGreaterEqual(len(root.findall(f".//{SVG}g[@class='tick-labels']/{SVG}text")), 6)

    def test_json_and_fragile_choice(self):
        code, out, err = cli("select", "--input", STRUCTURE, "--output", "json")
        self.assertEqual(code, 0, err)
        doc = json.loads(out)
        self.assertEqual(doc["chosenId"], "late-lin-59f")
        self.assertEqual(doc["chosenIndex"], 2)
        self.assertFalse(doc["fragile"])
        self.assertEqual(len(doc["candidates"]), 6)
        self.assertEqual(doc["familyName"], "vc-additive")

        # By hand: two identical candidates tie; the earlier wins and the
        # choice is fragile, naming the other one.
        request = {"family": "BOUND_FAMILY_VC_ADDITIVE", "failure_probability": 0.05,
                   "delta_spread": "DELTA_SPREAD_UNIFORM",
                   "structure": [{"id": "a", "error_count": 300, "sample_count": 8000,
                                  "capacity": {"vc_dimension": 30}},
                                 {"id": "b", "error_count": 300, "sample_count": 8000,
                                  "capacity": {"vc_dimension": 30}}]}
        with tempfile.TemporaryDirectory() as d:
            plot = os.path.join(d, "tie.svg")
            code, out, err = cli("select", "--input", "-", "--plot", plot,
                                 stdin=json.dumps(request))
            self.assertEqual(code, 0, err)
            self.assertIn("WARNING: fragile choice: b within 0.01", out)
            self.assertIn("Chosen (*): a", out)
            root = ET.parse(plot).getroot()
            self.assertEqual(len(root.findall(f".//{SVG}polyline")), 3)
            texts = " ".join("".join(t.itertext()) for t in root.iter(f"{SVG}text"))
            self.assertIn("fragile", texts)
            # Source: Vapnik (1998) bound (vc_bound above), both at eta = .05/2.
            self.assertIn(harness.up6(vc_bound(300, 8000, 30, 0.025)), out)  # rounded up

    def test_exit_codes(self):
        bad = {"family": "BOUND_FAMILY_VC_ADDITIVE", "failure_probability": 0.05,
               "structure": [{"id": "a", "error_count": 9, "sample_count": 5,
                              "capacity": {"vc_dimension": 3}}, {"id": "b", "sample_count": 5}]}
        code, out, err = cli("select", "--input", "-", stdin=json.dumps(bad))
        self.assertEqual(code, 3)
        self.assertIn("structure[0].error_count", err)
        self.assertIn("structure[1].capacity", err)
        self.assertEqual(out, "")
        code, _, err = cli("select", "--input", "-", stdin='{"structur": []}')
        self.assertEqual(code, 3)
        self.assertIn("structur", err)
        code, _, err = cli("select", "--input", "/nonexistent/structure.json")
        self.assertEqual(code, 3)
        for args in (("select",), ("select", "--input", STRUCTURE, "--output", "xml"),
                     ("select", "--input", STRUCTURE, "extra-word"), ("select", "--bogus")):
            code, _, err = cli(*args)
            self.assertEqual(code, 2, args)
            self.assertTrue(err.startswith("riskbound select"), err)
        code, _, err = cli("select", "--input", STRUCTURE, "--plot", "/nonexistent/dir/x.svg")
        self.assertEqual(code, 1)
        self.assertIn("cannot write the plot", err)
        port = harness.free_port_nobody_listens_on()
        p = subprocess.run([harness.ARGS.cli, "select", "--input", STRUCTURE, "--server",
                            f"127.0.0.1:{port}", "--timeout", "2"],
                           capture_output=True, text=True, timeout=60)
        self.assertEqual(p.returncode, 4)
        code, out, _ = cli("select", "--help")
        self.assertEqual(code, 0)
        self.assertIn("--plot", out)


class SelectHeuristicTest(unittest.TestCase):
    """select's heuristic mode: ranking by fitted effective VC dimensions,
    labelled so that it cannot be read as a certificate."""

    def test_table_json_and_plot_say_heuristic(self):
        with open(FITTED) as f:
            request = json.load(f)
        with tempfile.TemporaryDirectory() as d:
            plot = os.path.join(d, "fitted.svg")
            code, out, err = cli("select", "--input", FITTED, "--plot", plot)
            self.assertEqual(code, 0, err)
            root = ET.parse(plot).getroot()  # well-formed XML
        lines = out.splitlines()
        self.assertTrue(lines[0].startswith("HEURISTIC RANKING, NOT A CERTIFICATE"), lines[0])
        for word in ("h_hat (fitted)", "score", "NOT a bound on its true error",
                     "Note: HEURISTIC, NOT A BOUND", "no union bound is claimed",
                     "heuristic score, not a bound"):
            self.assertIn(word, out)
        # Nothing in the table reads as a guarantee.
        self.assertNotIn("true error <=", out)
        self.assertNotIn("with probability >=", out)
        self.assertNotIn("Chosen (*)", out)
        # Source: the additive VC formula written out in vc_bound above (Vapnik
        # 1998; Burges 1998 eq. 3) with the real h = h_hat, at the shares
        # .05 * 6/(pi^2 k^2): the first-ranked class is the smallest score.
        scores = []
        for k, c in enumerate(request["structure"], start=1):
            eta = request["failure_probability"] * 6 / (math.pi ** 2 * k * k)
            scores.append(vc_bound(c["error_count"], c["sample_count"],
                                   c["effective_vc_dimension"], eta))
        first = scores.index(min(scores))
        first_id = request["structure"][first]["id"]
        self.assertEqual(first_id, "route-gbt-d2")
        self.assertIn(f"Ranked first (*): {first_id} (structure[{first}]): heuristic score "
                      f"{harness.up6(scores[first])}", out)
        starred = [line for line in lines if line.startswith("*")]
        self.assertEqual(len(starred), 1)
        self.assertIn(first_id, starred[0])
        texts = " ".join("".join(t.itertext()) for t in root.iter(f"{SVG}text"))
        self.assertIn("HEURISTIC ranking, NOT a certificate", texts)
        self.assertIn("NOT a bound", texts)

        code, out, err = cli("select", "--input", FITTED, "--output", "json")
        self.assertEqual(code, 0, err)
        doc = json.loads(out)
        self.assertTrue(doc["heuristic"])
        self.assertEqual(doc["capacityMeasure"], "effective_vc_dimension")
        self.assertTrue(doc["notes"][0].startswith("HEURISTIC, NOT A BOUND"))
        self.assertEqual(doc["chosenId"], first_id)
        for got, want in zip(doc["candidates"], scores):
            self.assertAlmostEqual(got["riskUpperBound"], want, places=12)

    def test_flag_sets_the_request_field_and_bad_input_is_named(self):
        with open(FITTED) as f:
            request = json.load(f)
        del request["heuristic"]
        # Without the flag the fitted dimensions are refused, naming the field.
        code, out, err = cli("select", "--input", "-", stdin=json.dumps(request))
        self.assertEqual(code, 3)
        self.assertEqual(out, "")
        self.assertIn("structure[0].effective_vc_dimension", err)
        self.assertIn("set heuristic to rank by it", err)
        # --heuristic is the request's heuristic field.
        code, out, err = cli("select", "--input", "-", "--heuristic", "--output", "json",
                             stdin=json.dumps(request))
        self.assertEqual(code, 0, err)
        self.assertTrue(json.loads(out)["heuristic"])
        # An Occam family, a capacity beside h_hat, a negative h_hat.
        request["family"] = "BOUND_FAMILY_OCCAM_KL"
        request["structure"][1]["capacity"] = {"vc_dimension": 14}
        request["structure"][2]["effective_vc_dimension"] = -1
        code, out, err = cli("select", "--input", "-", "--heuristic",
                             stdin=json.dumps(request))
        self.assertEqual(code, 3)
        for field in ("family", "structure[1].capacity", "structure[2].effective_vc_dimension"):
            self.assertIn(field, err)
        code, out, _ = cli("select", "--help")
        self.assertEqual(code, 0)
        self.assertIn("--heuristic", out)
        self.assertIn("HEURISTIC RANKING, NOT A CERTIFICATE", out)


class PlanCommandTest(unittest.TestCase):
    def plan_json(self, *args):
        code, out, err = cli("plan", *args, "--output", "json")
        return code, (json.loads(out) if out else None), err

    def test_holdout_worked_values(self):
        # Source: Hanley & Lippman-Hand (1983) zero-failure size (0.99^299 =
        # .04954 <= .05 < 0.99^298): 299; checked here with the closed form.
        self.assertEqual(math.ceil(math.log(0.05) / math.log1p(-0.01)), 299)
        code, doc, err = self.plan_json("holdout", "--target-risk", "0.01", "--expected-risk", "0")
        self.assertEqual(code, 0, err)
        self.assertTrue(doc["reachable"])
        self.assertEqual(int(doc["sampleCount"]), 299)
        self.assertEqual(int(doc["holdout"]["zeroFailureSampleCount"]), 299)
        # Source: independent Python scan (scipy.stats.beta.isf Clopper-Pearson
        # limits): eps = .05, p = .03, delta = .05 -> 410.
        code, doc, err = self.plan_json("holdout", "--target-risk", "0.05", "--expected-risk",
                                        "0.03", "--delta", "0.05", "--samples-held", "250")
        self.assertEqual(code, 0, err)
        self.assertEqual(int(doc["sampleCount"]), 410)
        self.assertEqual(int(doc["additionalSampleCount"]), 160)
        # Source: independent Python scan (scipy.stats.binom.cdf): the same at
        # 80% pass probability -> 601, P(pass) = 0.8002.
        code, doc, err = self.plan_json("holdout", "--target-risk", "0.05", "--expected-risk",
                                        "0.03", "--pass-probability", "0.8")
        self.assertEqual(code, 0, err)
        self.assertEqual(int(doc["sampleCount"]), 601)
        self.assertAlmostEqual(doc["holdout"]["passProbabilityAtPlan"], 0.8002, places=4)
        code, out, err = cli("plan", "holdout", "--target-risk", "0.05", "--expected-risk", "0.03",
                             "--pass-probability", "0.8")
        self.assertEqual(code, 0, err)
        for word in ("hold-out examples needed", "601", "errors tolerated",
                     "size if no error at all occurs", "Rule:", "Cautions:"):
            self.assertIn(word, out)
        # P(pass) is printed rounded down (4 decimals), never above what holds.
        import decimal
        pass_at_plan = decimal.Decimal(repr(doc["holdout"]["passProbabilityAtPlan"])).quantize(
            decimal.Decimal("0.0001"), rounding=decimal.ROUND_FLOOR)
        row = [l for l in out.splitlines() if l.startswith("P(pass)")][0]
        self.assertEqual(row.split()[-1], str(pass_at_plan))

    def test_plan_flags_named_after_wire_fields(self):
        # --failure-probability / --held-sample-count are the wire names;
        # --delta / --samples-held are aliases: the same request, the same plan.
        code, new, err = self.plan_json("holdout", "--target-risk", "0.05", "--expected-risk",
                                        "0.03", "--failure-probability", "0.05",
                                        "--held-sample-count", "250")
        self.assertEqual(code, 0, err)
        code, old, err = self.plan_json("holdout", "--target-risk", "0.05", "--expected-risk",
                                        "0.03", "--delta", "0.05", "--samples-held", "250")
        self.assertEqual(code, 0, err)
        self.assertEqual(new, old)
        # training: expected_empirical_risk is the field; --expected-risk its alias.
        code, new, err = self.plan_json("training", "--vc-dimension", "10",
                                        "--expected-empirical-risk", "0.02",
                                        "--target-risk", "0.2", "--family", "VC_ADDITIVE")
        self.assertEqual(code, 0, err)
        code, old, err = self.plan_json("training", "--vc-dimension", "10", "--expected-risk",
                                        "0.02", "--target-risk", "0.2", "--family", "vc-additive")
        self.assertEqual(code, 0, err)
        self.assertEqual(new["sampleCount"], old["sampleCount"])
        self.assertEqual(new["training"]["family"], "BOUND_FAMILY_VC_ADDITIVE")
        code, out, err = cli("plan", "holdout", "-h")
        self.assertEqual(code, 0)
        self.assertIn("--held-sample-count N", out)
        self.assertIn("(also --samples-held)", out)
        self.assertIn("P(pass)", out.split("terms:")[1])

    def test_training_plans_and_comparisons(self):
        # Source: brute-force scan in fixture vc_invert.csv (scipy; Vapnik 1998
        # bound, inputs R_emp = .05, h = 100, target .10, delta = .05).
        with open(os.path.join(FIXTURES, "vc_invert.csv")) as f:
            row = next(csv.DictReader(line for line in f if not line.startswith("#")))
        code, doc, err = self.plan_json("training", "--family", "vc-additive", "--vc-dimension",
                                        "100", "--expected-risk", "0.05", "--target-risk", "0.10")
        self.assertEqual(code, 0, err)
        self.assertEqual(int(doc["sampleCount"]), int(float(row["planner_samples"])))
        # Source: Blumer et al. (1989) Thm 2.1(ii)(b) (from memory), evaluated
        # in Python: eps = .1, h = 1 -> 562.
        code, doc, err = self.plan_json("training", "--vc-dimension", "1", "--expected-risk", "0",
                                        "--target-risk", "0.1")
        self.assertEqual(code, 0, err)
        self.assertEqual(int(doc["training"]["comparisonOnly"]["realizableSampleCount"]), 562)
        # Source: Occam, Hoeffding form (Hoeffding 1963 plus a union bound) at
        # R_emp = 0, solved for m here: ceil((ln|H| + ln(1/delta)) / (2 eps^2));
        # Shalev-Shwartz & Ben-David (2014) Cor. 2.3 / 4.6 give the comparisons
        # 337 and 14004 for |H| = 1e6, eps = .05 (Python evaluation).
        expected = math.ceil((math.log(1e6) + math.log(1 / 0.05)) / (2 * 0.05 ** 2))
        code, out, err = cli("plan", "training", "--family", "occam-hoeffding",
                             "--hypothesis-count", "1000000", "--expected-risk", "0",
                             "--target-risk", "0.05", "--samples-held", "1000")
        self.assertEqual(code, 0, err)
        for word in ("training examples needed", str(expected), "additional examples needed",
                     str(expected - 1000), "For comparison only", "337", "14004", "Cautions:"):
            self.assertIn(word, out)

    def test_unreachable_target_exit_code(self):
        code, doc, err = self.plan_json("holdout", "--target-risk", "0.03", "--expected-risk",
                                        "0.05")
        self.assertEqual(code, 5)
        self.assertFalse(doc["reachable"])
        self.assertEqual(int(doc["sampleCount"]), 0)
        self.assertIn("not below the target risk", doc["reason"])
        self.assertIn("target unreachable", err)
        code, out, err = cli("plan", "training", "--vc-dimension", "10", "--expected-risk", "0.2",
                             "--target-risk", "0.1")
        self.assertEqual(code, 5)
        self.assertIn("Target unreachable", out)

    def test_usage_and_invalid_input(self):
        for args in (("plan",), ("plan", "bogus"), ("plan", "holdout", "--expected-risk", "0.1"),
                     ("plan", "training", "--target-risk", "0.1", "--expected-risk", "0"),
                     ("plan", "training", "--target-risk", "0.1", "--expected-risk", "0",
                      "--vc-dimension", "3", "--family", "no-such"),
                     ("plan", "holdout", "--target-risk", "x", "--expected-risk", "0")):
            code, _, err = cli(*args)
            self.assertEqual(code, 2, args)
            self.assertTrue(err.startswith("riskbound plan"), err)
        code, out, err = cli("plan", "holdout", "--target-risk", "0.05", "--expected-risk", "2")
        self.assertEqual(code, 3)
        self.assertIn("holdout.expected_risk", err)
        self.assertEqual(out, "")
        code, _, err = cli("plan", "training", "--family", "holdout-binomial", "--vc-dimension",
                           "3", "--target-risk", "0.1", "--expected-risk", "0")
        self.assertEqual(code, 3)
        self.assertIn("training.family", err)

    def test_help_documents_exit_code_five(self):
        code, out, _ = cli("--help")
        self.assertEqual(code, 0)
        self.assertIn("5  plan: the target risk is unreachable", out)
        for args in (("plan", "--help"), ("plan", "holdout", "--help"),
                     ("plan", "training", "--help")):
            code, out, _ = cli(*args)
            self.assertEqual(code, 0, args)
            self.assertIn("5 the target is unreachable", out)


if __name__ == "__main__":
    harness.main()
