#!/usr/bin/python3
"""End-to-end tests of `riskbound capacity` and `riskbound certify --model`.

The real riskbound-server runs on an ephemeral loopback port; each test runs
the CLI binary as a pipeline would and checks stdout, stderr and the exit
code. Expected values come from published VC dimensions and from the
published capacity formulas evaluated here independently with Python's exact
integers.
"""
import json
import math
import tempfile
import unittest

import harness


def cli(*args, stdin=None):
    return harness.run_cli(*args, stdin=stdin)


def relu_bound(widths):
    """Bartlett, Harvey, Liaw & Mehrabian (2019) Thm 7 (form from memory), evaluated here:
    L + Lbar W log2(4 e p R log2(2 e p R)), p = 2, R = sum_i i k_i,
    Lbar = (1/W) sum_i W_i; floored (a VC dimension is an integer)."""
    weights = [(widths[i - 1] + 1) * widths[i] for i in range(1, len(widths))]
    w = sum(weights)
    layers = len(weights)
    lbar = sum(sum(weights[:i + 1]) for i in range(layers)) / w
    r = sum((i + 1) * k for i, k in enumerate(widths[1:]))
    inner = 2 * math.e * 2 * r
    return w, math.floor(layers + lbar * w * math.log2(2 * inner * math.log2(inner)))


class CapacityCommandTest(unittest.TestCase):
    def test_relu_widths_prints_value_bound_type_and_source(self):
        # Source: BHLM (2019) Thm 7 evaluated in Python (relu_bound above);
        # W = 785*300 + 301*100 + 101*1 = 265701 by hand.
        w, expected = relu_bound([784, 300, 100, 1])
        self.assertEqual(w, 265701)
        code, out, err = cli("capacity", "relu", "--widths", "784,300,100,1")
        self.assertEqual(code, 0, err)
        self.assertIn(f"<= {expected} (upper bound)", out)
        self.assertIn("Bartlett, Harvey, Liaw & Mehrabian (2019)", out)
        self.assertIn("lower bound    785", out)  # d_0 + 1: the net contains every halfspace
        self.assertIn("W = 265701", out)
        self.assertIn("Notes:", out)
        # The same in JSON, with the value as an integer too.
        code, out, err = cli("capacity", "relu", "--widths", "784,300,100,1", "--output", "json")
        self.assertEqual(code, 0, err)
        est = json.loads(out)["estimate"]
        self.assertEqual(est["status"], "CAPACITY_STATUS_UPPER_BOUND")
        self.assertEqual(int(est["vcDimensionUint64"]), expected)
        self.assertEqual(est["vcDimensionLowerBound"], 785)
        # Source: BHLM (2019) Thm 7 (relu_bound above): widths 10-32-32-1 -> 46111.
        self.assertEqual(relu_bound([10, 32, 32, 1])[1], 46111)
        code, out, _ = cli("capacity", "relu", "--widths", "10,32,32,1")
        self.assertIn("<= 46111 (upper bound)", out)

    def test_textbook_values(self):
        # Source: Cover (1965); Shalev-Shwartz & Ben-David (2014) Thm 9.3:
        # halfspaces in R^d with bias have VC dimension d + 1.
        code, out, err = cli("capacity", "halfspace", "--dimension", "40")
        self.assertEqual(code, 0, err)
        self.assertIn("41 (exact)", out)
        self.assertIn("Cover (1965)", out)
        code, out, _ = cli("capacity", "halfspace", "--dimension", "40", "--no-bias",
                           "--output", "json")
        self.assertEqual(json.loads(out)["estimate"]["vcDimensionUint64"], "40")
        # Source: Shalev-Shwartz & Ben-David (2014) Ch. 6: boxes in R^d have 2d.
        code, out, _ = cli("capacity", "boxes", "--dimension", "2")
        self.assertIn("4 (exact)", out)
        # Source: common practice: a union of k intervals shatters 2k points.
        code, out, _ = cli("capacity", "intervals", "--intervals", "3")
        self.assertIn("6 (exact)", out)
        # Source: Anthony & Bartlett (1999) Thm 3.5 (from memory): monomials
        # of degree <= p in d variables,
        # C(d + p, p), here Python's exact math.comb(13, 3) = 286.
        code, out, _ = cli("capacity", "polynomial", "--dimension", "10", "--degree", "3",
                           "--output", "json")
        self.assertEqual(int(json.loads(out)["estimate"]["vcDimensionUint64"]), math.comb(13, 3))
        # Source: tree counting bound (shapes x splits x leaf labels), exact Python
        # integers: trees with L = 8 leaves over 20 features -> 92.
        code, out, _ = cli("capacity", "tree", "--leaves", "8", "--features", "20")
        self.assertIn("<= 92 (upper bound)", out)
        # Source: |H| = 2^20 -> ln |H| = 20 ln 2 (Python's math.log).
        code, out, _ = cli("capacity", "finite-class", "--hypotheses", str(2**20),
                           "--output", "json")
        self.assertAlmostEqual(json.loads(out)["estimate"]["logHypothesisCount"],
                               20 * math.log(2), places=12)
        # The API spelling of a kind works too.
        code, out, _ = cli("capacity", "axis_aligned_boxes", "--dimension", "3")
        self.assertEqual(code, 0)
        self.assertIn("6 (exact)", out)

    def test_infinite_families_answer_with_advice(self):
        # Source: Burges (1998) (RBF kernels); nearest neighbour stores any
        # labelled set: infinite VC dimension.
        for kind in ("nearest-neighbour", "rbf-kernel"):
            code, out, err = cli("capacity", kind)
            self.assertEqual(code, 0, err)
            self.assertIn("infinite", out)
            self.assertIn("hold-out", out)

    def test_input_file(self):
        request = {"model": {"kind": "MODEL_KIND_AXIS_ALIGNED_BOXES", "dimension": "5"}}
        with tempfile.NamedTemporaryFile("w", suffix=".json", delete=False) as f:
            json.dump(request, f)
        code, out, err = cli("capacity", "--input", f.name)
        self.assertEqual(code, 0, err)
        self.assertIn("10 (exact)", out)  # Source: boxes in R^5 -> 2d = 10 (SSBD Ch. 6)
        code, out, err = cli("capacity", "--input", "-", "--output", "json",
                             stdin=json.dumps(request))
        self.assertEqual(code, 0, err)
        self.assertEqual(json.loads(out)["estimate"]["vcDimension"], 10)

    def test_exit_codes(self):
        # 3: refused by the server, the field named.
        code, out, err = cli("capacity", "relu", "--widths", "784,300,100,10")
        self.assertEqual(code, 3)
        self.assertIn("model.layer_widths[3]", err)
        self.assertEqual(out, "")
        code, _, err = cli("capacity", "relu", "--widths", "784,0,1")
        self.assertEqual(code, 3)
        self.assertIn("model.layer_widths[1]", err)
        code, _, err = cli("capacity", "relu", "--parameters", str(10**12), "--units", "10",
                           "--layers", "2")
        self.assertEqual(code, 3)
        self.assertIn("model.weight_count", err)
        code, _, err = cli("capacity", "halfspace", "--dimension", "4", "--degree", "2")
        self.assertEqual(code, 3)
        self.assertIn("model.degree", err)
        code, _, err = cli("capacity", "--input", "-",
                           stdin='{"model": {"kind": "MODEL_KIND_HALFSPACE", "dimensoin": 3}}')
        self.assertEqual(code, 3)
        self.assertIn("dimensoin", err)
        code, _, err = cli("capacity", "--input", "/nonexistent/capacity.json")
        self.assertEqual(code, 3)
        self.assertIn("/nonexistent/capacity.json", err)
        # 2: usage errors, caught before any call.
        for args in (("capacity",),
                     ("capacity", "no-such-kind"),
                     ("capacity", "relu", "--widths", "3,x,1"),
                     ("capacity", "relu", "--widths", "3,-2,1"),
                     ("capacity", "halfspace", "--dimension", "-4"),
                     ("capacity", "margin-linear", "--radius", "nan", "--margin", "0.1"),
                     ("capacity", "halfspace", "--bogus", "1"),
                     ("capacity", "halfspace", "extra-word"),
                     ("capacity", "halfspace", "--input", "x.json"),
                     ("capacity", "halfspace", "--dimension", "3", "--output", "xml")):
            code, out, err = cli(*args)
            self.assertEqual(code, 2, (args, err))
            self.assertTrue(err.startswith("riskbound capacity:"), err)
            self.assertEqual(out, "")
        # 4: nobody listens.
        port = harness.free_port_nobody_listens_on()
        code, _, err = cli("capacity", "halfspace", "--dimension", "3",
                           "--server", f"127.0.0.1:{port}", "--timeout", "2")
        self.assertEqual(code, 4)

    def test_help(self):
        code, out, _ = cli("capacity", "--help")
        self.assertEqual(code, 0)
        for word in ("relu", "margin-linear", "nearest-neighbour", "--layer-widths",
                     "--leaf-count", "(also --widths)", "(also --leaves)", "model.layer_widths",
                     "MODEL_KIND_RELU_NETWORK"):
            self.assertIn(word, out)
        self.assertIn("upper bound", out.split("terms:")[1])

    def test_kinds_by_word_and_enum_name_and_wire_flag_names(self):
        # Source: BHLM (2019) Thm 7: widths 10-32-32-1 -> 46111
        # (relu_bound above evaluates the formula in Python).
        self.assertEqual(relu_bound([10, 32, 32, 1])[1], 46111)
        for kind in ("relu", "MODEL_KIND_RELU_NETWORK", "RELU_NETWORK", "relu_network",
                     "relu-network"):
            for flag in ("--layer-widths", "--widths"):
                code, out, err = cli("capacity", kind, flag, "10,32,32,1", "--output", "json")
                self.assertEqual(code, 0, (kind, flag, err))
                self.assertEqual(int(json.loads(out)["estimate"]["vcDimensionUint64"]), 46111)
        # The table names the kind as the user typed it, never an internal name.
        code, out, err = cli("capacity", "relu", "--layer-widths", "10,32,32,1")
        self.assertEqual(code, 0, err)
        self.assertTrue(out.startswith("Capacity of relu ("), out)
        self.assertNotIn("relu_network", out)
        code, out, err = cli("capacity", "MODEL_KIND_RELU_NETWORK", "--layer-widths", "10,32,32,1")
        self.assertTrue(out.startswith("Capacity of MODEL_KIND_RELU_NETWORK ("), out)
        # A bad width is named by its 0-based wire path only.
        code, _, err = cli("capacity", "relu", "--layer-widths", "10,x,1")
        self.assertEqual(code, 2)
        self.assertIn("model.layer_widths[1]", err)
        self.assertNotIn("width 2", err)
        # A tree by the wire names of its fields and by the old spellings:
        # the same request, the same answer.
        a = cli("capacity", "tree", "--leaf-count", "8", "--feature-count", "5", "--output", "json")
        b = cli("capacity", "DECISION_TREE", "--leaves", "8", "--features", "5", "--output", "json")
        self.assertEqual(a[0], 0, a[2])
        self.assertEqual(json.loads(a[1])["estimate"], json.loads(b[1])["estimate"])
        code, out, _ = cli("--help")
        self.assertIn("capacity", out)


class CertifyWithModelTest(unittest.TestCase):
    def certify_json(self, *args, stdin=None):
        code, out, err = cli("certify", *args, "--output", "json", stdin=stdin)
        self.assertEqual(code, 0, err)
        return json.loads(out)

    def test_model_flags_equal_explicit_vc_dimension(self):
        # The belt-jam detector of the demo registry: 270 errors on 9,000
        # windows, a halfspace in R^40 -> h = 41 (Cover 1965).
        a = self.certify_json("--train-errors", "270", "--train-samples", "9000",
                              "--model", "halfspace", "--dimension", "40", "--family", "all")
        b = self.certify_json("--train-errors", "270", "--train-samples", "9000",
                              "--vc-dimension", "41", "--family", "all")
        self.assertEqual(len(a["certificates"]), len(b["certificates"]))
        for x, y in zip(a["certificates"], b["certificates"]):
            self.assertEqual(x["riskUpperBound"], y["riskUpperBound"])
            self.assertTrue(any("capacity used: VC dimension h = 41 (exact)" in n
                                for n in x["notes"]), x["notes"])
        # Source: Vapnik (1998) Ch. 4, the additive bound evaluated here:
        # 0.03 + sqrt((h (ln(2m/h) + 1) - ln(delta/4)) / m) + 1/m, at delta =
        # 0.05 / 2 (two families, union bound).
        h, m, delta = 41, 9000, 0.025
        vc = 270 / m + math.sqrt((h * (math.log(2 * m / h) + 1) - math.log(delta / 4)) / m) + 1 / m
        additive = [c for c in a["certificates"] if c["familyName"] == "vc-additive"][0]
        self.assertAlmostEqual(additive["riskUpperBound"], vc, places=9)

    def test_model_in_json_input(self):
        request = {"evidence": {"training": {"errorCount": "96", "sampleCount": "12000",
                                             "capacity": {"model": {
                                                 "kind": "MODEL_KIND_FINITE_CLASS",
                                                 "hypothesisCount": str(2**20)}}}},
                   "failureProbability": 0.05}
        a = self.certify_json("--input", "-", stdin=json.dumps(request))
        b = self.certify_json("--train-errors", "96", "--train-samples", "12000",
                              "--hypothesis-count", str(2**20))
        self.assertEqual(a["tightest"]["familyName"], "occam-kl")
        self.assertEqual(a["tightest"]["riskUpperBound"], b["tightest"]["riskUpperBound"])
        self.assertTrue(any("capacity used: ln |H|" in n for n in a["tightest"]["notes"]))
        # A ReLU net given by its widths, in the table for people.
        code, out, err = cli("certify", "--train-errors", "120", "--train-samples", "2000000",
                             "--model", "relu", "--widths", "10,32,32,1")
        self.assertEqual(code, 0, err)
        self.assertIn("capacity used: VC dimension h <= 46111 (an upper bound", out)
        self.assertIn("Cautions:", out)

    def test_model_exit_codes(self):
        code, _, err = cli("certify", "--train-errors", "5", "--train-samples", "100",
                           "--model", "nearest-neighbour")
        self.assertEqual(code, 3)
        self.assertIn("evidence.training.capacity.model", err)
        self.assertIn("hold-out", err)
        code, _, err = cli("certify", "--train-errors", "5", "--train-samples", "100",
                           "--model", "relu", "--widths", "10,0,1")
        self.assertEqual(code, 3)
        self.assertIn("evidence.training.capacity.model.layer_widths[1]", err)
        for args in (("--train-errors", "5", "--train-samples", "100", "--dimension", "4"),
                     ("--train-errors", "5", "--train-samples", "100", "--model", "halfspace",
                      "--dimension", "4", "--vc-dimension", "5"),
                     ("--train-errors", "5", "--train-samples", "100", "--model", "no-such"),
                     ("--model", "halfspace", "--dimension", "4"),
                     ("--input", "x.json", "--model", "halfspace")):
            code, out, err = cli("certify", *args)
            self.assertEqual(code, 2, (args, err))
            self.assertEqual(out, "")


if __name__ == "__main__":
    harness.main()
