#!/usr/bin/python3
"""End-to-end tests of `--slices FILE` (certify and gate) against a live
riskbound-server: the CSV and JSON forms, bad rows named by file, line and
column (exit 3), tables worst first, the max_risk column, --slice-sharing
sidak, and the gate's PROMOTE / HOLD / REJECT with slices.

Reference values: per-slice one-sided Clopper-Pearson limits from
scipy.stats.beta (through /usr/bin/python3) at the slice's share of delta:
Bonferroni (1936), delta / G; Sidak (1967), 1 - (1 - delta)^(1/G).
"""
import csv
import io
import json
import os
import shutil
import tempfile
import unittest

from scipy.stats import beta

import harness

DIR = None  # set in the __main__ block
EXAMPLES = os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", "..", "examples",
                        "fernhill")


def write(name, text):
    path = os.path.join(DIR, name)
    with open(path, "w", encoding="utf-8") as f:
        f.write(text)
    return path


def cp_upper(k, n, a):
    """One-sided Clopper-Pearson upper limit at level a.
    Source: scipy.stats.beta.ppf (Clopper & Pearson 1934)."""
    return 1.0 if k == n else float(beta.ppf(1 - a, k + 1, n - k))


def cp_lower(k, n, a):
    """One-sided Clopper-Pearson lower limit at level a.
    Source: scipy.stats.beta.ppf (Clopper & Pearson 1934)."""
    return 0.0 if k == 0 else float(beta.ppf(a, k, n - k + 1))


# Four disjoint depot regions of one hold-out set (invented counts).
SLICES = [("north-hills", 36, 1800), ("river-valley", 34, 1700), ("east-ring", 36, 1700),
          ("harbour-quay", 74, 800)]
CSV = "name,error_count,sample_count\n" + "".join(f"{n},{k},{m}\n" for n, k, m in SLICES)


def certify(*args):
    return harness.run_cli("certify", *args)


def gate(*args):
    return harness.run_cli("gate", *args)


class SliceFileFormsTest(unittest.TestCase):
    def test_csv_gives_a_certificate_per_slice_at_the_bonferroni_share(self):
        code, out, err = certify("--slices", write("s.csv", CSV), "--output", "json")
        self.assertEqual(code, 0, err)
        doc = json.loads(out)
        summary = doc["slices"]
        self.assertEqual(summary["rule"], "SLICE_SHARE_RULE_BONFERRONI")
        # Only slices: they get the whole delta, delta / G each (Bonferroni 1936).
        share = 0.05 / len(SLICES)
        certs = {c["sliceName"]: c["certificate"] for c in summary["sliceCertificates"]}
        self.assertEqual(sorted(certs), sorted(n for n, _, _ in SLICES))
        for name, k, n in SLICES:
            c = certs[name]
            self.assertLessEqual(c["failureProbability"], share)
            self.assertAlmostEqual(c["failureProbability"], share, delta=share * 1e-9)
            # Source: scipy.stats.beta.ppf, Clopper-Pearson at the share.
            self.assertAlmostEqual(c["riskUpperBound"], cp_upper(k, n, share), delta=1e-9)
            self.assertAlmostEqual(c["empiricalRisk"], k / n, delta=1e-15)
        worst = max(SLICES, key=lambda s: cp_upper(s[1], s[2], share))
        self.assertEqual(summary["worstSliceName"], worst[0])
        self.assertEqual(doc["certificates"], [])

    def test_json_forms_read_the_same_slices(self):
        want = certify("--slices", write("same.csv", CSV), "--output", "json")
        self.assertEqual(want[0], 0, want[2])
        objects = [{"name": n, "error_count": k, "sample_count": m} for n, k, m in SLICES]
        camel = [{"name": n, "errorCount": str(k), "sampleCount": str(m)} for n, k, m in SLICES]
        forms = {
            "array.json": json.dumps(objects, indent=1),
            "object.json": json.dumps({"slices": camel}),
            "lines.jsonl": "".join(json.dumps(o) + "\n" for o in objects),
            # A spreadsheet's byte order mark, columns in another order,
            # CRLF line ends, quoted cells, blank lines.
            "reordered.csv": "\ufeffsample_count,name,error_count\r\n\r\n" + "".join(
                f'{m},"{n}",{k}\r\n' for n, k, m in SLICES),
        }
        for name, text in forms.items():
            got = certify("--slices", write(name, text), "--output", "json")
            self.assertEqual(got[0], 0, (name, got[2]))
            self.assertEqual(json.loads(got[1]), json.loads(want[1]), name)
        # From stdin.
        got = harness.run_cli("certify", "--slices", "-", "--output", "json", stdin=CSV)
        self.assertEqual(json.loads(got[1]), json.loads(want[1]))

    def test_bad_rows_name_file_line_and_column(self):
        cases = [
            ("x.csv", "name,error_count,sample_count\na,1,10\nb,x,10\n",
             ", line 3, column 3 (error_count): 'x' is not a whole number >= 0"),
            ("neg.csv", "name,error_count,sample_count\na,1,-10\n",
             ", line 2, column 5 (sample_count): '-10' is not a whole number >= 0"),
            ("short.csv", "name,error_count,sample_count\na,1,10\nb,4\n",
             ", line 3, column 4: 2 cells where the header has 3"),
            ("long.csv", "name,error_count,sample_count\na,1,10,7\n",
             ", line 2, column 8: 4 cells where the header has 3"),
            ("over.csv", "name,error_count,sample_count\na,11,10\n",
             ", line 2, column 3 (error_count): 11 errors exceed the slice's 10 examples"),
            ("zero.csv", "name,error_count,sample_count\na,0,0\n",
             ", line 2, column 5 (sample_count): a slice needs at least 1 example"),
            ("twice.csv", "name,error_count,sample_count\na,1,10\na,2,20\n",
             ", line 3, column 1 (name): slice 'a' is named twice (first on line 2)"),
            ("empty-name.csv", "name,error_count,sample_count\n,1,10\n",
             ", line 2, column 1 (name): the slice name is empty"),
            ("header.csv", "name,errors,sample_count\na,1,10\n",
             ", line 1, column 6: unknown column 'errors' in the header"),
            ("no-header.csv", "a,1,10\n", ", line 1, column 1: unknown column 'a'"),
            ("missing.csv", "name,error_count\na,1\n",
             ", line 1, column 1: the header has no 'sample_count' column"),
            ("limit.csv", "name,error_count,sample_count,max_risk\na,1,10,1.5\n",
             ", line 2, column 8 (max_risk): '1.5' is not a limit in (0, 1)"),
            ("quote.csv", 'name,error_count,sample_count\n"a,1,10\n',
             ", line 2, column 1: a quoted cell is not closed"),
            # A quote inside an unquoted cell is text; the columns after it
            # still count (found by cli_input_fuzz: they once ran out).
            ("inner-quote.csv", 'name,error_count,sample_count\nb"c,x,10\n',
             ", line 2, column 5 (error_count): 'x' is not a whole number >= 0"),
            ("quoted-comma.csv", 'name,error_count,sample_count\n"b,c",1,-9\n',
             ", line 2, column 9 (sample_count): '-9' is not a whole number >= 0"),
            ("header-only.csv", "name,error_count,sample_count\n", ": no slices in the file"),
            ("type.json", '[{"name": "a", "error_count": 1, "sample_count": 10},\n'
                          ' {"name": "b", "error_count": true, "sample_count": 10}]',
             ", line 2, column 31 (error_count): must be a whole number >= 0"),
            ("key.json", '{"slices": [\n  {"name": "a", "errors": 1, "sample_count": 10}]}',
             ", line 2, column 17: unknown key 'errors'"),
            ("syntax.json", '[{"name": "a", "error_count": 1 "sample_count": 10}]',
             ", line 1, column 33: expected ',' or '}' in an object"),
            ("fraction.jsonl", '{"name": "a", "error_count": 1.5, "sample_count": 10}\n',
             ", line 1, column 30 (error_count): '1.5' is not a whole number >= 0"),
            ("absent.json", '[{"name": "a", "sample_count": 10}]',
             ", line 1, column 2: the slice has no error_count"),
        ]
        for name, text, words in cases:
            path = write(name, text)
            for command in (certify, gate):
                args = ("--slices", path)
                if command is gate:
                    args += ("--max-risk", "0.1", "--delta", "0.05", "--candidate-id", "m",
                             "--holdout-error-count", "3", "--holdout-sample-count", "100",
                             "--max-slice-risk", "0.2")
                code, out, err = command(*args)
                self.assertEqual(code, 3, (name, err))
                self.assertEqual(out, "", name)
                self.assertIn(f"--slices: {path}{words}", err, name)
        code, _, err = certify("--slices", os.path.join(DIR, "no-such-file.csv"))
        self.assertEqual(code, 3, err)
        self.assertIn("cannot read", err)

    def test_usage_errors(self):
        path = write("u.csv", CSV)
        for args, words in (
                (("--slices", path, "--slice-sharing", "holm"), "'holm' is no share rule"),
                (("--errors", "3", "--samples", "100", "--slice-sharing", "sidak"),
                 "--slice-sharing needs --slices"),
                (("--input", os.path.join(EXAMPLES, "models", "late-risk-v12.json"),
                  "--slices", path), "--input excludes --slices"),
                (("--slices", ""), "--slices needs a file name")):
            code, out, err = certify(*args)
            self.assertEqual(code, 2, (args, err))
            self.assertIn(words, err, args)


class SliceTablesTest(unittest.TestCase):
    def rows_after(self, out, title):
        lines = out.splitlines()
        start = next(i for i, l in enumerate(lines) if l.startswith(title))
        rows = []
        for line in lines[start + 1:]:
            if not line.strip():
                if rows:
                    break
                continue
            rows.append(line.split())
        return rows[0], rows[1:]

    def test_certify_table_worst_first_with_statement_and_rule(self):
        code, out, err = certify("--holdout-error-count", "180", "--holdout-sample-count", "6000",
                                 "--slices", write("t.csv", CSV))
        self.assertEqual(code, 0, err)
        self.assertEqual(err, "")
        header, rows = self.rows_after(out, "Slices, worst first")
        self.assertEqual(header, ["slice_name", "error_count", "sample_count", "empirical",
                                  "upper", "lower", "failure_probability"])
        # With other evidence the slices get delta / 2, shared by Bonferroni.
        share = 0.025 / len(SLICES)
        expected = sorted(SLICES, key=lambda s: (-cp_upper(s[1], s[2], share), s[0]))
        self.assertEqual([r[0] for r in rows], [s[0] for s in expected])
        for row, (name, k, n) in zip(rows, expected):
            self.assertEqual(row[1:3], [str(k), str(n)])
            # Printed outward: upper rounded up, lower down (six decimals).
            self.assertEqual(row[4], harness.up6(cp_upper(k, n, share)))
            self.assertEqual(row[5], harness.down6(cp_lower(k, n, share)))
        self.assertIn(f"Worst slice: {expected[0][0]}, true error <= {rows[0][4]}", out)
        self.assertIn("Statement: with probability >= 1 - 0.025, no slice's true error exceeds",
                      out)
        self.assertIn("Share rule: bonferroni; the slices spent 0.025 of their 0.025", out)
        self.assertIn("Bonferroni 1936", out)
        self.assertIn("not a fairness audit", out)

    def test_max_risk_column_is_a_note_for_certify(self):
        text = "name,error_count,sample_count,max_risk\na,1,100,0.1\nb,2,100,\n"
        code, out, err = certify("--slices", write("limits.csv", text))
        self.assertEqual(code, 0, err)
        self.assertIn("note: the max_risk column of", err)
        self.assertIn("is read by `riskbound gate` only", err)

    def test_sidak_share(self):
        code, out, err = certify("--slices", write("sidak.csv", CSV), "--slice-sharing", "sidak",
                                 "--output", "json")
        self.assertEqual(code, 0, err)
        summary = json.loads(out)["slices"]
        self.assertEqual(summary["rule"], "SLICE_SHARE_RULE_SIDAK")
        # Source: Sidak (1967): share 1 - (1 - delta)^(1/G), rounded toward zero.
        share = 1 - (1 - 0.05) ** (1 / len(SLICES))
        self.assertGreater(share, 0.05 / len(SLICES))
        for entry in summary["sliceCertificates"]:
            c = entry["certificate"]
            k, n = next((k, n) for s, k, n in SLICES if s == entry["sliceName"])
            self.assertLessEqual(c["failureProbability"], share * (1 + 1e-15))
            self.assertAlmostEqual(c["failureProbability"], share, delta=share * 1e-8)
            # Source: scipy.stats.beta.ppf at the reported share.
            self.assertAlmostEqual(c["riskUpperBound"],
                                   cp_upper(k, n, c["failureProbability"]), delta=1e-9)
        code, out, err = certify("--slices", write("sidak2.csv", CSV), "--slice-sharing",
                                 "SLICE_SHARE_RULE_SIDAK")
        self.assertEqual(code, 0, err)
        self.assertIn("Share rule: sidak", out)
        self.assertIn("Sidak 1967", out)


def gate_args(errors=180, samples=6000, max_risk="0.05", *more):
    return ("--max-risk", max_risk, "--failure-probability", "0.05", "--candidate-id", "late-v15",
            "--holdout-error-count", str(errors), "--holdout-sample-count", str(samples)) + more


def expected_gate(slices, limit, errors=180, samples=6000, max_risk=0.05):
    """The verdict the gate's rules give, from scipy's Clopper-Pearson limits
    at the shares of docs/gate.md: delta 0.05 in two parts (risk, slices);
    each half per side; the slices' part / G per slice (Bonferroni)."""
    part = 0.025
    per_side = part / 2
    slice_side = part / len(slices) / 2
    outcomes = {}
    for name, k, n in slices:
        if cp_upper(k, n, slice_side) <= limit:
            outcomes[name] = "SLICE_OUTCOME_CLEARS"
        elif cp_lower(k, n, slice_side) > limit:
            outcomes[name] = "SLICE_OUTCOME_EXCEEDS"
        else:
            outcomes[name] = "SLICE_OUTCOME_UNDECIDED"
    if ("SLICE_OUTCOME_EXCEEDS" in outcomes.values() or
            cp_lower(errors, samples, per_side) > max_risk):
        verdict = "REJECT"
    elif (set(outcomes.values()) == {"SLICE_OUTCOME_CLEARS"} and
          cp_upper(errors, samples, per_side) <= max_risk):
        verdict = "PROMOTE"
    else:
        verdict = "HOLD"
    return verdict, outcomes


class SliceGateTest(unittest.TestCase):
    CODES = {"PROMOTE": 0, "HOLD": 10, "REJECT": 11}

    def check(self, slices, limit, want):
        path = write(f"gate-{want}.csv", "name,error_count,sample_count\n" +
                     "".join(f"{n},{k},{m}\n" for n, k, m in slices))
        verdict, outcomes = expected_gate(slices, limit)
        self.assertEqual(verdict, want)  # the case is what it claims to be
        code, out, err = gate(*gate_args(), "--slices", path, "--max-slice-risk", str(limit),
                              "--output", "json")
        self.assertEqual(code, self.CODES[want], err)
        doc = json.loads(out)
        self.assertEqual(doc["verdict"], "VERDICT_" + want)
        self.assertEqual({s["sliceName"]: s["outcome"] for s in doc["slices"]}, outcomes)
        for s in doc["slices"]:
            self.assertEqual(s["maxRisk"], limit)
        # The table: worst first (largest upper - limit), every slice's reason.
        code, out, err = gate(*gate_args(), "--slices", path, "--max-slice-risk", str(limit))
        self.assertEqual(code, self.CODES[want], err)
        self.assertEqual(out.splitlines()[0], want)
        lines = out.splitlines()
        start = lines.index(
            "Slices, worst first (bonferroni sharing of the slices' delta):")
        self.assertEqual(lines[start + 1].split(),
                         ["slice_name", "outcome", "max_risk", "errors/samples", "lower", "upper",
                          "additional_sample_count"])
        rows = [l.split() for l in lines[start + 2:start + 2 + len(slices)]]
        side = 0.025 / len(slices) / 2
        order = sorted(slices, key=lambda s: (-(cp_upper(s[1], s[2], side) - limit), s[0]))
        self.assertEqual([r[0] for r in rows], [s[0] for s in order])
        for r, (name, k, n) in zip(rows, order):
            self.assertEqual(r[1], outcomes[name].replace("SLICE_OUTCOME_", ""))
            self.assertEqual(r[3], f"{k}/{n}")
            self.assertEqual(r[4], harness.down6(cp_lower(k, n, side)))
            self.assertEqual(r[5], harness.up6(cp_upper(k, n, side)))
        self.assertIn("Slice reasons:", out)
        for name, _, _ in slices:
            self.assertIn(f"  * {name}: slice '{name}'", out)
        return out

    def test_promote_when_every_slice_clears(self):
        self.check([("north-hills", 36, 1800), ("river-valley", 34, 1700),
                    ("east-ring", 36, 1700), ("harbour-quay", 20, 800)], 0.06, "PROMOTE")

    def test_hold_names_the_undecided_slice_and_its_plan(self):
        out = self.check([("north-hills", 36, 1800), ("river-valley", 34, 1700),
                          ("east-ring", 36, 1700), ("harbour-quay", 30, 800)], 0.05, "HOLD")
        self.assertIn("undecided ('harbour-quay')", out)
        row = [l for l in out.splitlines() if l.strip().startswith("harbour-quay  UNDECIDED")][0]
        self.assertTrue(row.split()[-1].isdigit(), row)  # its additional_sample_count
        self.assertIn("More labelled hold-out samples expected to settle the verdict:", out)

    def test_reject_when_one_slice_exceeds_though_fine_overall(self):
        out = self.check(SLICES, 0.06, "REJECT")
        self.assertIn("REJECT: slice 'harbour-quay' exceeds its limit", out)

    def test_max_risk_column_sets_per_slice_limits(self):
        text = ("name,error_count,sample_count,max_risk\n"
                "north-hills,36,1800,0.04\nriver-valley,34,1700,\n"
                "east-ring,36,1700,0.05\nharbour-quay,74,800,0.15\n")
        code, out, err = gate(*gate_args(), "--slices", write("per-slice.csv", text),
                              "--max-slice-risk", "0.06", "--output", "json")
        self.assertIn(code, (0, 10, 11), err)
        limits = {s["sliceName"]: s["maxRisk"] for s in json.loads(out)["slices"]}
        # The empty cell takes --max-slice-risk (policy.max_slice_risk).
        self.assertEqual(limits, {"north-hills": 0.04, "river-valley": 0.06, "east-ring": 0.05,
                                  "harbour-quay": 0.15})
        # Every slice with its own limit: no --max-slice-risk needed.
        text = text.replace("1700,\n", "1700,0.06\n")
        code, out, err = gate(*gate_args(), "--slices", write("all-limits.csv", text))
        self.assertEqual(code, 0, err)
        # A slice without a limit is refused by the server, field named.
        code, out, err = gate(*gate_args(), "--slices", write("one-limit.csv", text.replace(
            "1700,0.06\n", "1700,\n")))
        self.assertEqual(code, 3, err)
        self.assertIn("policy.max_slice_risk", err)

    def test_sidak_sharing_in_the_gate(self):
        code, out, err = gate(*gate_args(), "--slices", write("gs.csv", CSV), "--max-slice-risk",
                              "0.06", "--slice-sharing", "sidak", "--output", "json")
        self.assertEqual(code, 11, err)
        doc = json.loads(out)
        # Source: Sidak (1967): the slices' part 0.025 shared as
        # 1 - (1 - 0.025)^(1/G), each slice's entry in the ledger.
        share = 1 - (1 - 0.025) ** (1 / len(SLICES))
        entries = [d for d in doc["deltaLedger"] if d.get("sliceName")]
        self.assertEqual(len(entries), len(SLICES))
        for d in entries:
            self.assertAlmostEqual(d["failureProbability"], share, delta=share * 1e-8)
        self.assertLessEqual(doc["audit"]["spentFailureProbability"], 0.05)
        code, out, err = gate(*gate_args(), "--slices", write("gs2.csv", CSV), "--max-slice-risk",
                              "0.06", "--slice-sharing", "sidak")
        self.assertIn("Slices, worst first (sidak sharing of the slices' delta):", out)
        self.assertIn("slice entries combined by Sidak", out)

    def digest(self, *args):
        code, out, err = gate(*args, "--output", "json")
        self.assertIn(code, (0, 10, 11), err)
        return json.loads(out)["audit"]["requestSha256"]

    def test_files_with_slices_and_flags_that_override_them(self):
        policy = write("policy.json", json.dumps({"maxRisk": 0.05, "failureProbability": 0.05,
                                                  "maxSliceRisk": 0.06}))
        with_slices = write("cand.json", json.dumps({"id": "late-v15", "evidence": {
            "holdout": {"errorCount": "180", "sampleCount": "6000"},
            "slices": [{"name": n, "errorCount": str(k), "sampleCount": str(m)}
                       for n, k, m in SLICES]}}))
        from_files = self.digest("--policy", policy, "--candidate", with_slices)
        from_flags = self.digest(*gate_args(), "--slices", write("o.csv", CSV),
                                 "--max-slice-risk", "0.06")
        self.assertEqual(from_files, from_flags)
        code, out, err = gate("--policy", policy, "--candidate", with_slices)
        self.assertEqual(code, 11, err)
        # --slices replaces the candidate file's slices; --max-slice-risk the
        # policy file's limit: the same request as files saying so.
        other = [("a", 1, 500), ("b", 2, 500)]
        replaced = self.digest("--policy", policy, "--candidate", with_slices, "--slices",
                               write("ab.csv", "name,error_count,sample_count\na,1,500\nb,2,500\n"),
                               "--max-slice-risk", "0.07")
        policy2 = write("policy2.json", json.dumps({"maxRisk": 0.05, "failureProbability": 0.05,
                                                    "maxSliceRisk": 0.07}))
        cand2 = write("cand2.json", json.dumps({"id": "late-v15", "evidence": {
            "holdout": {"errorCount": "180", "sampleCount": "6000"},
            "slices": [{"name": n, "errorCount": str(k), "sampleCount": str(m)}
                       for n, k, m in other]}}))
        self.assertEqual(replaced, self.digest("--policy", policy2, "--candidate", cand2))

    def test_demo_candidate(self):
        # examples/fernhill: fine overall (180 / 6000), harbour-quay above 6%.
        code, out, err = gate("--policy", os.path.join(EXAMPLES, "gate", "policy.json"),
                              "--candidate",
                              os.path.join(EXAMPLES, "gate", "late-risk-v15.candidate.json"),
                              "--slices", os.path.join(EXAMPLES, "gate",
                                                       "late-risk-v15.slices.csv"))
        self.assertEqual(code, 11, err)
        self.assertIn("true error, upper bound (holdout-binomial)", out)
        self.assertIn("at or below: passes", out)
        self.assertIn("harbour-quay  EXCEEDS", out)


class ScoreWithSlicesTest(unittest.TestCase):
    """riskbound score over registry records with slices: the CSV slice
    columns, the JSON lines rows they come from, and the table's detail."""

    HOLD_SLICES = SLICES[:3] + [("harbour-quay", 45, 800)]

    def registry(self):
        def record(rid, version, slices):
            return json.dumps({
                "record_id": rid, "model_name": "late-risk", "model_version": version,
                "evidence": {"holdout": {"error_count": sum(k for _, k, _ in slices),
                                         "sample_count": sum(m for _, _, m in slices)},
                             "slices": [{"name": n, "error_count": k, "sample_count": m}
                                        for n, k, m in slices]}})
        return write("registry-slices.jsonl",
                     record("r-15", "v15", SLICES) + "\n" +
                     record("r-16", "v16", self.HOLD_SLICES) + "\n")

    def policy(self):
        return write("policy-slices.json", json.dumps(
            {"maxRisk": 0.05, "failureProbability": 0.05, "maxSliceRisk": 0.06}))

    def score(self, *args):
        code, out, err = harness.run_cli("score", self.registry(), *args)
        self.assertEqual(code, 0, err)
        return out

    def test_gate_csv_columns(self):
        rows = list(csv.DictReader(io.StringIO(self.score("--policy", self.policy(),
                                                          "--output", "csv"))))
        self.assertEqual([r["verdict"] for r in rows], ["REJECT", "HOLD"])
        # Per slice, its upper bound at half its Bonferroni share of the
        # slices' half of delta. Source: scipy.stats.beta.ppf (Clopper & Pearson 1934).
        side = 0.025 / 4 / 2
        for row, slices in zip(rows, (SLICES, self.HOLD_SLICES)):
            worst = max(slices, key=lambda s: cp_upper(s[1], s[2], side))
            self.assertEqual(row["worst_slice_name"], worst[0])
            self.assertAlmostEqual(float(row["worst_slice_upper_bound"]) /
                                   cp_upper(worst[1], worst[2], side), 1.0, delta=1e-9)
        self.assertEqual((rows[0]["exceeding_slice_count"], rows[0]["undecided_slice_count"]),
                         ("1", "0"))
        self.assertEqual((rows[1]["exceeding_slice_count"], rows[1]["undecided_slice_count"]),
                         ("0", "1"))
        # The same numbers as the JSON lines rows, where every slice is.
        for row, line in zip(rows, self.score("--policy", self.policy(), "--output",
                                              "jsonl").splitlines()):
            checks = json.loads(line)["result"]["gated"]["slices"]
            worst = max(checks, key=lambda c: c["risk_upper_bound"])
            self.assertEqual(float(row["worst_slice_upper_bound"]), worst["risk_upper_bound"])
            for outcome, column in (("SLICE_OUTCOME_EXCEEDS", "exceeding_slice_count"),
                                    ("SLICE_OUTCOME_UNDECIDED", "undecided_slice_count")):
                self.assertEqual(int(row[column]),
                                 sum(c["outcome"] == outcome for c in checks))

    def test_gate_table_names_the_slices(self):
        out = self.score("--policy", self.policy())
        lines = [l for l in out.splitlines() if "late-risk" in l]
        self.assertEqual(len(lines), 2, out)
        self.assertIn("REJECT", lines[0])
        self.assertIn("slice harbour-quay above its limit", lines[0])
        self.assertIn("HOLD", lines[1])
        self.assertIn("slice harbour-quay undecided", lines[1])

    def test_certify_csv_and_table_show_the_worst_slice(self):
        rows = list(csv.DictReader(io.StringIO(self.score("--output", "csv"))))
        docs = [json.loads(l)["result"]["certified"]["slices"]
                for l in self.score("--output", "jsonl").splitlines()]
        for row, doc in zip(rows, docs):
            self.assertEqual(row["worst_slice_name"], "harbour-quay")
            self.assertEqual(row["worst_slice_name"], doc["worst_slice_name"])
            self.assertEqual(float(row["worst_slice_upper_bound"]), doc["worst_slice_upper_bound"])
            self.assertEqual(row["exceeding_slice_count"], "")
        out = self.score()
        self.assertIn("worst slice harbour-quay", out)


if __name__ == "__main__":
    DIR = tempfile.mkdtemp(prefix="riskbound-slices-")
    try:
        harness.main()
    finally:
        shutil.rmtree(DIR, ignore_errors=True)
