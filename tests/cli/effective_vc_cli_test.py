"""`riskbound effective-vc` (RPC FitEffectiveVcDimension, a heuristic) end to
end: the curve's values recomputed here, the exact-curve recovery, the exact
1-D threshold case enumerated here, a censored input, field paths.

Run as ctest cli_effective_vc (needs --server and --cli)."""
import json
import math
import os
import tempfile
import unittest
import xml.etree.ElementTree as ET
from fractions import Fraction

from scipy.optimize import minimize_scalar

import harness

A, B = 0.16, 1.2
K = 0.5 - 2 * A - A * A * B  # from Phi(0.5) = 1


def phi(tau):
    """Vapnik, Levin & LeCun (1994) curve, written out here independently of
    the server (a = 0.16, b = 1.2, k from Phi(0.5) = 1)."""
    if tau < 0.5:
        return 1.0
    lg = math.log(2 * tau) + 1
    return A * lg / (tau - K) * (math.sqrt(1 + B * (tau - K) / lg) + 1)


def request_file(points, training="RELABEL_TRAINING_EXACT", **extra):
    req = {"designPoints": [{"halfSampleCount": str(n), "deviations": list(xs)}
                            for n, xs in points],
           "training": training}
    req.update(extra)
    fd, path = tempfile.mkstemp(suffix=".json", prefix="riskbound-evc-")
    with os.fdopen(fd, "w") as f:
        json.dump(req, f)
    return path


def fit(points, **extra):
    code, out, err = harness.run_cli("effective-vc", "--input", request_file(points, **extra),
                                     "--output", "json")
    assert code == 0, err
    return json.loads(out)


def threshold_mean_deviation(n):
    """Exact E xi(n) for thresholds {x -> 1[s(x - t) > 0]} with exact training
    and fair-coin labels: xi = 1 - 2 * (min training errors on the merged
    flipped sample) / (2n), averaged over all 2^(2n) label patterns (flipping
    a fixed half of fair-coin labels gives fair-coin labels). Points in a row;
    by brute force over cuts and both polarities."""
    m = 2 * n
    total = 0
    for bits in range(1 << m):
        # errors of "first k points 0, rest 1" = ones in prefix + zeros in suffix
        ones = [0] * (m + 1)
        for i in range(m):
            ones[i + 1] = ones[i] + ((bits >> i) & 1)
        best = m
        for k in range(m + 1):
            e = ones[k] + (m - k) - (ones[m] - ones[k])
            best = min(best, e, m - e)
        total += m - 2 * best
    return Fraction(total, m * (1 << m))


class EffectiveVcTest(unittest.TestCase):
    def test_curve_values_of_the_issue(self):
        # Source: the formula above, evaluated in Python; the issue's values.
        for tau, want in ((1, 0.721609), (2, 0.492956), (10, 0.194024), (30, 0.104690)):
            self.assertAlmostEqual(phi(tau), want, places=6)
        self.assertAlmostEqual(K, 0.14928, places=15)
        self.assertAlmostEqual(phi(0.5), 1.0, places=15)
        # The server's fitted curve at h_hat = 1 gives the same values.
        pts = [(n, [phi(n)]) for n in (1, 2, 10, 30)]
        got = fit(pts, bootstrapResampleCount="10")
        self.assertAlmostEqual(got["effectiveVcDimension"], 1.0, places=6)
        for p in got["points"]:
            self.assertAlmostEqual(p["fittedDeviation"], phi(int(p["halfSampleCount"])), places=6)

    def test_exact_curve_recovery(self):
        # Source: issue 18 (xi = Phi(n/11) at n = 6..330 returns 11.000).
        got = fit([(n, [phi(n / 11)]) for n in range(6, 331)], bootstrapResampleCount="10")
        self.assertEqual(f"{got['effectiveVcDimension']:.3f}", "11.000")
        self.assertFalse(got.get("censored", False))
        self.assertIn("heuristic, not a bound", got["notes"][0])

    def test_thresholds_by_enumeration(self):
        # Source: brute-force enumeration of all 2^(2n) label patterns (issue
        # 18's fractions), then scipy.optimize.minimize_scalar on the same
        # least squares, and the server's fit: about 2.643.
        means = [threshold_mean_deviation(n) for n in range(1, 10)]
        self.assertEqual(means, [Fraction(1), Fraction(3, 4), Fraction(31, 48), Fraction(37, 64),
                                 Fraction(169, 320), Fraction(501, 1024),
                                 Fraction(13133, 28672), Fraction(7083, 16384),
                                 Fraction(242203, 589824)])
        ns = range(1, 10)
        sse = lambda h: sum((float(x) - phi(n / h)) ** 2 for n, x in zip(ns, means))
        ref = minimize_scalar(sse, bounds=(0.5, 20), method="bounded",
                              options={"xatol": 1e-10}).x
        self.assertAlmostEqual(ref, 2.643, delta=5e-4)
        got = fit([(n, [float(x)]) for n, x in zip(ns, means)], bootstrapResampleCount="10")
        self.assertAlmostEqual(got["effectiveVcDimension"], ref, delta=1e-6)

    def test_censored_input_is_flagged(self):
        code, out, err = harness.run_cli(
            "effective-vc", "--input", request_file([(5, [1.0, 1.0]), (10, [1.0]), (20, [1.0])]))
        self.assertEqual(code, 0, err)
        self.assertIn("HEURISTIC ESTIMATE, NOT A BOUND", out)
        self.assertIn(">= 40 (censored: a lower limit only)", out)
        self.assertIn("censored", out.split("flags", 1)[1].splitlines()[0])

    def test_plot_is_an_svg_with_the_points_and_the_curve(self):
        # Source: the SVG 1.1 document parsed with Python's XML parser.
        plot = tempfile.mktemp(suffix=".svg", prefix="riskbound-evc-")
        pts = [(n, [phi(n / 3), phi(n / 3) + 0.01]) for n in (2, 4, 8, 16, 32, 64)]
        code, out, err = harness.run_cli("effective-vc", "--input", request_file(pts),
                                         "--plot", plot)
        self.assertEqual(code, 0, err)
        self.assertIn(f"Plot written to {plot}", out)
        root = ET.parse(plot).getroot()
        ns = "{http://www.w3.org/2000/svg}"
        self.assertEqual(len([e for e in root.iter(ns + "polyline")
                              if e.get("class") == "curve-fitted"]), 1)
        self.assertEqual(len([e for e in root.iter(ns + "circle")
                              if e.get("class") == "point-mean"]), 6)
        texts = " ".join(e.text or "" for e in root.iter(ns + "text"))
        self.assertIn("a heuristic, not a bound", texts)
        self.assertIn("sampling noise only", texts)
        self.assertIn("; 95% interval [", texts)
        os.unlink(plot)

    def test_bad_input_names_the_fields(self):
        code, out, err = harness.run_cli(
            "effective-vc", "--input",
            request_file([(0, [0.5]), (4, [1.5])], training="RELABEL_TRAINING_UNSPECIFIED"))
        self.assertEqual(code, 3, out + err)
        for field in ("design_points[0].half_sample_count", "design_points[1].deviations[0]",
                      "training"):
            self.assertIn(field, err)


if __name__ == "__main__":
    harness.main()
