"""Capacity measured on the data (evidence.relabel) end to end: a brute-force
exact learner for thresholds on the line is retrained on relabelled copies of a
simulated sample, the raw draws go to `riskbound certify --input`, and the
certificate is recomputed here with numpy from the same draws. Also: the
heuristic marking of approximate training, the gate's refusal, and field paths.

Run as ctest cli_relabel (needs --server and --cli)."""
import json
import math
import os
import tempfile
import unittest

import numpy as np

import harness


def min_threshold_errors(x, z):
    """Brute force: the least 0-1 errors of {x -> s*sign(x - t)} on labels z
    (every cut between sorted points, both polarities). Returns (errors, h)."""
    order = np.argsort(x, kind="stable")
    zs = z[order]
    m = len(z)
    best = (m + 1, None)
    for k in range(m + 1):
        for s in (1, -1):
            pred = np.where(np.arange(m) < k, -s, s)
            e = int(np.sum(pred != zs))
            if e < best[0]:
                h = np.empty(m, dtype=int)
                h[order] = pred
                best = (e, h)
    return best


def write_json(obj):
    fd, path = tempfile.mkstemp(suffix=".json", prefix="riskbound-relabel-")
    with os.fdopen(fd, "w") as f:
        json.dump(obj, f)
    return path


class RelabelTest(unittest.TestCase):
    @classmethod
    def setUpClass(cls):
        rng = np.random.default_rng(20240611)
        cls.m = 60
        cls.x = rng.integers(0, 100, size=cls.m)  # a grid of thresholds' inputs
        cls.y = np.where(cls.x + rng.normal(0, 15, size=cls.m) > 50, 1, -1)
        cls.errors, _ = min_threshold_errors(cls.x, cls.y)
        cls.sign_errors = []
        for _ in range(25):
            sigma = rng.choice([-1, 1], size=cls.m)
            cls.sign_errors.append(min_threshold_errors(cls.x, sigma * cls.y)[0])
        flipped = np.arange(cls.m) % 2 == 1  # the odd indices, fixed in advance
        z = np.where(flipped, -cls.y, cls.y)
        _, h = min_threshold_errors(cls.x, z)
        wrong = h != cls.y
        cls.half = (int(np.sum(wrong & flipped)), int(np.sum(wrong & ~flipped)))

    def certify(self, relabel, families, *extra):
        req = {"evidence": {"relabel": relabel}, "failureProbability": 0.05,
               "listed": {"families": families}}
        return harness.run_cli("certify", "--input", write_json(req), *extra)

    def signs(self, training="RELABEL_TRAINING_EXACT"):
        return {"errorCount": str(self.errors), "sampleCount": str(self.m),
                "scheme": "RELABEL_SCHEME_RANDOM_SIGNS", "training": training,
                "draws": [{"relabelledErrorCount": str(e)} for e in self.sign_errors]}

    def test_random_signs_matches_numpy(self):
        code, out, err = self.certify(self.signs(), ["BOUND_FAMILY_RADEMACHER"],
                                      "--output", "json")
        self.assertEqual(code, 0, err)
        cert = json.loads(out)["certificates"][0]
        # Source: numpy mean of the per-draw sup (1 - 2 e_j / m); Mohri,
        # Rostamizadeh & Talwalkar (2018) Thm 3.5 at delta/2 plus the McDiarmid
        # (1989) slack sqrt(2 ln(2/delta) / (m N)) at delta/2, evaluated here.
        m, n, delta = self.m, len(self.sign_errors), 0.05
        rhat = float(np.mean(1.0 - 2.0 * np.array(self.sign_errors) / m))
        slack = math.sqrt(2.0 * math.log(2.0 / delta) / (m * n))
        want = (self.errors / m + max(0.0, rhat + slack)
                + 3.0 * math.sqrt(math.log(4.0 / delta) / (2.0 * m)))
        self.assertAlmostEqual(cert["riskUpperBound"], min(1.0, want), places=12)
        self.assertEqual(cert["familyName"], "rademacher")
        self.assertFalse(cert.get("heuristic", False))
        self.assertTrue(any(f"Rhat_N = {rhat:.6f}" in note for note in cert["notes"]))

    def test_half_flip_matches_numpy(self):
        relabel = {"errorCount": str(self.errors), "sampleCount": str(self.m),
                   "scheme": "RELABEL_SCHEME_HALF_FLIP", "training": "RELABEL_TRAINING_EXACT",
                   "draws": [{"flippedHalfErrorCount": str(self.half[0]),
                              "keptHalfErrorCount": str(self.half[1])}]}
        code, out, err = self.certify(relabel, ["BOUND_FAMILY_MAXIMAL_DISCREPANCY"],
                                      "--output", "json")
        self.assertEqual(code, 0, err)
        cert = json.loads(out)["certificates"][0]
        # Source: brute-force maximal discrepancy over every threshold (Bartlett,
        # Boucheron & Lugosi 2002), computed here directly as max (L_A - L_B),
        # and the bound k/m + D + 3 sqrt(ln(1/delta) / (2m)) evaluated here.
        flipped = np.arange(self.m) % 2 == 1
        order = np.argsort(self.x, kind="stable")
        best = -1.0
        for k in range(self.m + 1):
            for s in (1, -1):
                h = np.empty(self.m, dtype=int)
                h[order] = np.where(np.arange(self.m) < k, -s, s)
                wrong = h != self.y
                best = max(best, (np.sum(wrong & flipped) - np.sum(wrong & ~flipped))
                           / (self.m / 2))
        self.assertAlmostEqual((self.half[0] - self.half[1]) / (self.m / 2), best, places=15)
        want = self.errors / self.m + best + 3.0 * math.sqrt(math.log(1 / 0.05) / (2 * self.m))
        self.assertAlmostEqual(cert["riskUpperBound"], min(1.0, want), places=12)

    def test_approximate_is_marked_heuristic(self):
        code, out, err = self.certify(self.signs("RELABEL_TRAINING_APPROXIMATE"),
                                      ["BOUND_FAMILY_RADEMACHER"])
        self.assertEqual(code, 0, err)
        self.assertIn("rademacher (heuristic)", out)
        self.assertIn("HEURISTIC: the tightest row is an estimate, not a bound", out)
        self.assertIn("HEURISTIC, NOT A BOUND", out)

    def test_gate_refuses_approximate_training(self):
        policy = write_json({"maxRisk": 0.5, "failureProbability": 0.05,
                             "allowedFamilies": ["BOUND_FAMILY_RADEMACHER"]})
        candidate = write_json({"id": "thresholds-v1",
                                "evidence": {"relabel": self.signs(
                                    "RELABEL_TRAINING_APPROXIMATE")}})
        code, out, err = harness.run_cli("gate", "--policy", policy, "--candidate", candidate)
        self.assertEqual(code, 3, out + err)
        self.assertIn("candidate.evidence.relabel.training", err)

    def test_missing_scheme_names_the_field(self):
        relabel = self.signs()
        del relabel["scheme"]
        code, out, err = self.certify(relabel, ["BOUND_FAMILY_RADEMACHER"])
        self.assertEqual(code, 3, out + err)
        self.assertIn("evidence.relabel.scheme", err)


if __name__ == "__main__":
    harness.main()
