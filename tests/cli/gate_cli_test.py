#!/usr/bin/python3
"""End-to-end tests of `riskbound gate` against a live riskbound-server.

A pipeline branches on the exit code alone: PROMOTE 0, HOLD 10, REJECT 11,
invalid input 3. The audit digest printed by the CLI is recomputed here from
the same JSON files with protobuf's pure-Python implementation and hashlib.
"""
import os

# Before any protobuf import: the pure-Python implementation, so the digest
# check below does not run through the C++ library the server uses.
os.environ["PROTOCOL_BUFFERS_PYTHON_IMPLEMENTATION"] = "python"

import hashlib  # noqa: E402
import json  # noqa: E402
import shutil  # noqa: E402
import subprocess  # noqa: E402
import sys  # noqa: E402
import tempfile  # noqa: E402
import unittest  # noqa: E402

import harness  # noqa: E402

class Files:
    """Writes JSON documents to a temporary directory, returning their paths."""

    def __init__(self):
        self.dir = tempfile.mkdtemp(prefix="riskbound-gate-files-")
        self.count = 0

    def write(self, doc):
        self.count += 1
        path = os.path.join(self.dir, f"doc{self.count}.json")
        with open(path, "w") as f:
            f.write(doc if isinstance(doc, str) else json.dumps(doc))
        return path


FILES = None  # set in the __main__ block


def gate(policy, candidate, champion=None, *extra, server=None):
    cmd = [harness.ARGS.cli, "gate", "--policy", FILES.write(policy), "--candidate",
           FILES.write(candidate), "--server", server or harness.ADDRESS]
    if champion is not None:
        cmd += ["--champion", FILES.write(champion)]
    cmd += list(extra)
    p = subprocess.run(cmd, capture_output=True, text=True, timeout=60)
    return p.returncode, p.stdout, p.stderr


def policy(max_risk=0.05, delta=0.05, **more):
    doc = {"maxRisk": max_risk, "failureProbability": delta}
    doc.update(more)
    return doc


def candidate(errors, samples, model_id="damage-screen-v8"):
    return {"id": model_id,
            "evidence": {"holdout": {"errorCount": str(errors), "sampleCount": str(samples)}}}


def paired(both, only_champion, only_challenger, samples, champion_id="damage-screen-v7"):
    return {"championId": champion_id,
            "paired": {"bothWrongCount": str(both), "onlyChampionWrongCount": str(only_champion),
                       "onlyChallengerWrongCount": str(only_challenger),
                       "sampleCount": str(samples)}}


class GateVerdictTest(unittest.TestCase):
    def test_exit_codes_each_side_of_the_risk_boundaries(self):
        # Source: scipy.stats.beta Clopper-Pearson limits at delta/2 per side
        # (fixture gate_risk_boundary.csv: n = 1000, max_risk = 0.05,
        # delta = 0.05 -> PROMOTE up to 36 errors, REJECT from 65).
        for errors, code, word in ((36, 0, "PROMOTE"), (37, 10, "HOLD"), (64, 10, "HOLD"),
                                   (65, 11, "REJECT")):
            got, out, err = gate(policy(), candidate(errors, 1000))
            self.assertEqual(got, code, (errors, err))
            self.assertEqual(out.splitlines()[0], word, errors)
            self.assertEqual(err, "")

    def test_table_for_people(self):
        code, out, err = gate(policy(minHoldoutSampleCount="1000"), candidate(0, 600))
        self.assertEqual(code, 10, err)
        lines = out.splitlines()
        self.assertEqual(lines[0], "HOLD")
        for words in ("Reasons:", "  * HOLD: 600 hold-out samples", "minimum of 1000",
                      "Key numbers:", "true error, upper bound (holdout-binomial)",
                      "max_risk 0.05", "Failure probability ledger",
                      "risk upper bound: holdout-binomial", "total spent",
                      "More labelled hold-out samples expected to settle the verdict: 400",
                      "Audit record:", "request sha256:", "families used:    holdout-binomial",
                      "Cautions:", "distribution shift", "model-risk review"):
            self.assertIn(words, out)

    def test_champion_comparison_with_mcnemar(self):
        # McNemar exact one-sided p for b = 10 (only the candidate wrong),
        # c = 25 (only the champion wrong).
        # Source: scipy.stats.binomtest(10, 35, 0.5, alternative="less").
        from scipy.stats import binomtest
        expected_p = binomtest(10, 35, 0.5, alternative="less").pvalue
        code, out, err = gate(policy(maxRegression=0.01), candidate(15, 1000),
                              paired(5, 25, 10, 1000), "--output", "json")
        self.assertEqual(code, 0, err)
        doc = json.loads(out)
        self.assertEqual(doc["verdict"], "VERDICT_PROMOTE")
        self.assertAlmostEqual(doc["mcnemarPValue"], expected_p, places=12)
        self.assertLessEqual(doc["differenceUpperBound"], 0.01)
        self.assertEqual(len(doc["deltaLedger"]), 4)
        for entry in doc["deltaLedger"]:
            self.assertEqual(entry["failureProbability"], 0.0125)
        self.assertLessEqual(doc["audit"]["spentFailureProbability"], 0.05)
        # Same counts, no tolerance: the upper difference limit is above 0.
        code, out, err = gate(policy(), candidate(15, 1000), paired(5, 25, 10, 1000))
        self.assertEqual(code, 10, err)
        self.assertIn("McNemar exact one-sided p-value", out)
        self.assertIn("candidate - champion error, upper bound", out)
        # What a p-value is, and what it is not.
        self.assertIn("if the two models were equally good, the probability of a split", out)
        self.assertIn("it is not the probability that it is better", out)
        self.assertNotIn("(candidate better)", out)
        # Printed outward: the p-value up, the difference bounds up / down.
        code, js, err = gate(policy(), candidate(15, 1000), paired(5, 25, 10, 1000),
                             "--output", "json")
        doc = json.loads(js)
        row = [l for l in out.splitlines() if "McNemar exact one-sided p-value (see below)" in l][0]
        self.assertIn(harness.up_sig(expected_p), row.split())
        upper = [l for l in out.splitlines() if "champion error, upper bound" in l][0]
        lower = [l for l in out.splitlines() if "champion error, lower bound" in l][0]
        def signed(text):
            return text if text.startswith("-") else "+" + text
        self.assertIn(signed(harness.up6(doc["differenceUpperBound"])), upper.split())
        self.assertIn(signed(harness.down6(doc["differenceLowerBound"])), lower.split())

    def test_worse_than_champion_rejects(self):
        # Fixture gate_paired_boundary.csv (scipy Clopper-Pearson at delta/8):
        # n = 2000, c = 40, tolerance 0 -> REJECT from b = 79.
        code, out, err = gate(policy(max_risk=0.5), candidate(10 + 79, 2000),
                              paired(10, 40, 79, 2000))
        self.assertEqual(code, 11, err)
        self.assertTrue(out.startswith("REJECT\n"))
        self.assertIn("worse than champion 'damage-screen-v7'", out)
        code, _, err = gate(policy(max_risk=0.5), candidate(10 + 78, 2000),
                            paired(10, 40, 78, 2000))
        self.assertEqual(code, 10, err)

    def test_unpaired_champion_says_weaker(self):
        # Candidate 30/1000, champion 40/1000 on its own set: the difference
        # upper limit at delta/4 (delta/8 per side) is 0.0201248.
        # Source: scipy.stats.beta Clopper-Pearson limits (fixture
        # unpaired_difference.csv, row delta = 0.0125).
        unpaired = {"championId": "damage-screen-v7",
                    "championHoldout": {"errorCount": "40", "sampleCount": "1000"}}
        code, out, err = gate(policy(max_risk=0.1, maxRegression=0.021), candidate(30, 1000),
                              unpaired)
        self.assertEqual(code, 0, err)
        self.assertIn("weaker", out)
        self.assertIn("unpaired: weaker comparison", out)
        code, out, err = gate(policy(max_risk=0.1, maxRegression=0.02), candidate(30, 1000),
                              unpaired)
        self.assertEqual(code, 10, err)


def gate_flags(*args, server=None):
    """Runs `riskbound gate` with the given words (flags and/or files)."""
    cmd = [harness.ARGS.cli, "gate", *args, "--server", server or harness.ADDRESS]
    p = subprocess.run(cmd, capture_output=True, text=True, timeout=60)
    return p.returncode, p.stdout, p.stderr


class GateInlineFlagsTest(unittest.TestCase):
    """A CI step needs no files: every common field is a flag, and a flag
    overrides the same field of a file. The audit digest (SHA-256 of the
    canonical request) shows the request is the same either way."""

    def digest(self, code, out, err):
        self.assertIn(code, (0, 10, 11), err)
        return json.loads(out)["audit"]["requestSha256"]

    def test_flags_alone_equal_the_files(self):
        docs = (policy(allowedFamilies=["BOUND_FAMILY_HOLDOUT_EXACT_BINOMIAL",
                                        "BOUND_FAMILY_HOLDOUT_KL_CHERNOFF"],
                       minHoldoutSampleCount="1000", maxRegression=0.005,
                       planPassProbability=0.9),
                candidate(20, 2000), paired(12, 15, 8, 2000))
        from_files = gate(*docs, "--output", "json")
        from_flags = gate_flags(
            "--max-risk", "0.05", "--failure-probability", "0.05",
            "--allowed-families", "holdout-binomial,BOUND_FAMILY_HOLDOUT_KL_CHERNOFF",
            "--min-holdout-sample-count", "1000", "--max-regression", "0.005",
            "--plan-pass-probability", "0.9",
            "--candidate-id", "damage-screen-v8", "--holdout-error-count", "20",
            "--holdout-sample-count", "2000",
            "--champion-id", "damage-screen-v7", "--both-wrong-count", "12",
            "--only-champion-wrong-count", "15", "--only-challenger-wrong-count", "8",
            "--output", "json")
        self.assertEqual(self.digest(*from_flags), self.digest(*from_files))
        self.assertEqual(json.loads(from_flags[1])["verdict"],
                         json.loads(from_files[1])["verdict"])
        # The short aliases build the same request.
        aliased = gate_flags("--max-risk", "0.05", "--delta", "0.05",
                             "--allowed-families", "holdout-binomial,holdout-kl",
                             "--min-holdout-sample-count", "1000", "--max-regression", "0.005",
                             "--plan-pass-probability", "0.9",
                             "--candidate-id", "damage-screen-v8", "--errors", "20",
                             "--sample-count", "2000",
                             "--champion-id", "damage-screen-v7", "--both-wrong-count", "12",
                             "--only-champion-wrong-count", "15",
                             "--only-challenger-wrong-count", "8", "--output", "json")
        self.assertEqual(self.digest(*aliased), self.digest(*from_files))
        # A policy file may name the families by their CLI words too.
        worded = dict(docs[0], allowedFamilies=["holdout-binomial", "holdout_kl_chernoff"])
        self.assertEqual(self.digest(*gate(worded, docs[1], docs[2], "--output", "json")),
                         self.digest(*from_files))

    def test_verdicts_from_flags(self):
        # Same boundary as test_exit_codes_each_side_of_the_risk_boundaries
        # (scipy Clopper-Pearson, fixture gate_risk_boundary.csv).
        for errors, want in ((36, 0), (37, 10), (65, 11)):
            code, out, err = gate_flags("--max-risk", "0.05", "--failure-probability", "0.05",
                                        "--candidate-id", "m", "--holdout-error-count",
                                        str(errors), "--holdout-sample-count", "1000")
            self.assertEqual(code, want, (errors, err))

    def test_sequential_flag_and_field(self):
        # --sequential sets policy.sequential (the same request as the file
        # field, so the same digest); the table and the ledger say so.
        flags = ("--max-risk", "0.05", "--failure-probability", "0.05",
                 "--candidate-id", "damage-screen-v8", "--holdout-error-count", "40",
                 "--holdout-sample-count", "1000")
        code, out, err = gate_flags(*flags, "--sequential")
        self.assertEqual(code, 10, err)
        self.assertIn("sequential mode: anytime-valid bounds", out)
        self.assertIn("true error, upper bound (holdout-anytime)", out)
        self.assertIn("true error, lower bound (holdout-anytime)", out)
        self.assertIn("risk lower bound: holdout-anytime (anytime-valid)", out)
        self.assertIn("under the anytime-valid bounds (sequential mode)", out)
        as_flag = gate_flags(*flags, "--sequential", "--output", "json")
        as_field = gate(policy(sequential=True), candidate(40, 1000), None, "--output", "json")
        self.assertEqual(self.digest(*as_flag), self.digest(*as_field))
        # Without it, the same counts are gated with Clopper-Pearson.
        code, out, err = gate_flags(*flags)
        self.assertNotIn("sequential mode", out)
        self.assertIn("true error, lower bound (Clopper-Pearson)", out)
        # A fixed-size hold-out family with --sequential: refused, field named.
        code, out, err = gate_flags(*flags, "--sequential", "--allowed-families",
                                    "holdout-binomial")
        self.assertEqual(code, 3, err)
        self.assertIn("policy.allowed_families[0]: holdout-binomial holds for one look", err)

    def test_a_flag_overrides_its_field_of_a_file(self):
        # The file says max_risk 0.05 (36/1000 passes, 37 holds); the flag
        # raises it to 0.5, the same request as a file with 0.5.
        strict, loose = policy(max_risk=0.05), policy(max_risk=0.5)
        code, out, err = gate(strict, candidate(37, 1000), None, "--output", "json")
        self.assertEqual(code, 10, err)
        overridden = gate(strict, candidate(37, 1000), None, "--max-risk", "0.5",
                          "--output", "json")
        self.assertEqual(overridden[0], 0, overridden[2])
        self.assertEqual(self.digest(*overridden),
                         self.digest(*gate(loose, candidate(37, 1000), None, "--output", "json")))
        # The candidate's counts and id override the candidate file.
        overridden = gate(strict, candidate(90, 1000), None, "--holdout-error-count", "36",
                          "--candidate-id", "other", "--output", "json")
        self.assertEqual(overridden[0], 0, overridden[2])
        self.assertEqual(self.digest(*overridden),
                         self.digest(*gate(strict, candidate(36, 1000, "other"), None,
                                           "--output", "json")))

    def test_flag_usage_errors(self):
        for args, words in (
                (("--max-risk", "0.05", "--candidate-id", "m", "--holdout-error-count", "1",
                  "--holdout-sample-count", "10"), "--failure-probability"),
                (("--max-risk", "0.05", "--delta", "0.05", "--holdout-error-count", "1",
                  "--holdout-sample-count", "10"), "--candidate-id"),
                (("--max-risk", "0.05", "--delta", "0.05", "--candidate-id", "m",
                  "--holdout-error-count", "1"), "go together"),
                (("--max-risk", "0.05", "--delta", "0.05", "--candidate-id", "m",
                  "--holdout-error-count", "1", "--holdout-sample-count", "10",
                  "--both-wrong-count", "1"), "go together"),
                (("--max-risk", "0.05", "--delta", "0.05", "--candidate-id", "m",
                  "--holdout-error-count", "1", "--holdout-sample-count", "10",
                  "--champion-id", "c"), "paired counts"),
                (("--max-risk", "0.05", "--delta", "0.05", "--candidate-id", "m",
                  "--holdout-error-count", "1", "--holdout-sample-count", "10",
                  "--allowed-families", "no-such"), "unknown family 'no-such'"),
                (("--max-risk", "x", "--delta", "0.05", "--candidate-id", "m"), "--max-risk")):
            code, out, err = gate_flags(*args)
            self.assertEqual(code, 2, (args, err))
            self.assertIn(words, err, args)
            self.assertEqual(out, "")
        # A bad value the server checks is still named by its field.
        code, _, err = gate_flags("--max-risk", "0.05", "--delta", "2", "--candidate-id", "m",
                                  "--holdout-error-count", "1", "--holdout-sample-count", "10")
        self.assertEqual(code, 3, err)
        self.assertIn("policy.failure_probability", err)

    def test_table_rounds_outward(self):
        code, js, err = gate_flags("--max-risk", "0.05", "--delta", "0.05", "--candidate-id", "m",
                                   "--holdout-error-count", "37", "--holdout-sample-count", "1000",
                                   "--output", "json")
        doc = json.loads(js)
        code, out, err = gate_flags("--max-risk", "0.05", "--delta", "0.05", "--candidate-id", "m",
                                    "--holdout-error-count", "37", "--holdout-sample-count",
                                    "1000")
        self.assertEqual(code, 10, err)
        upper = [l for l in out.splitlines() if "true error, upper bound" in l][0]
        self.assertIn(harness.up6(doc["riskCertificate"]["riskUpperBound"]), upper.split())
        lower = [l for l in out.splitlines() if "true error, lower bound" in l][0]
        self.assertIn(harness.down6(doc["riskLowerBound"]), lower.split())
        self.assertIn("confidence >= 0.95 (delta = 0.05)", out)


class GateDigestTest(unittest.TestCase):
    @classmethod
    def setUpClass(cls):
        sys.path.insert(0, harness.ARGS.stubs)
        global gate_pb2, json_format
        from google.protobuf import json_format  # noqa: E402
        from google.protobuf.internal import api_implementation  # noqa: E402
        from riskbound.v1 import gate_pb2  # noqa: E402
        assert api_implementation.Type() == "python", api_implementation.Type()

    def expected_digest(self, policy_doc, candidate_doc, champion_doc=None):
        request = gate_pb2.GateRequest()
        json_format.Parse(json.dumps(policy_doc), request.policy)
        json_format.Parse(json.dumps(candidate_doc), request.candidate)
        if champion_doc is not None:
            json_format.Parse(json.dumps(champion_doc), request.champion)
        return hashlib.sha256(request.SerializeToString(deterministic=True)).hexdigest()

    def printed_digest(self, policy_doc, candidate_doc, champion_doc=None):
        code, out, err = gate(policy_doc, candidate_doc, champion_doc, "--output", "json")
        self.assertIn(code, (0, 10, 11), err)
        return json.loads(out)["audit"]["requestSha256"]

    def test_digest_equals_hashlib_of_the_deterministic_serialization(self):
        # Source: Python's hashlib.sha256 over protobuf's pure-Python
        # deterministic serialization of the same JSON files.
        docs = (policy(allowedFamilies=["BOUND_FAMILY_HOLDOUT_EXACT_BINOMIAL",
                                        "BOUND_FAMILY_HOLDOUT_KL_CHERNOFF"],
                       minHoldoutSampleCount="1000", maxRegression=0.005),
                candidate(20, 2000), paired(12, 15, 8, 2000))
        printed = self.printed_digest(*docs)
        self.assertEqual(printed, self.expected_digest(*docs))
        # The table prints the same digest.
        code, out, err = gate(*docs)
        self.assertIn(f"request sha256:   {printed}", out)
        # Stable across runs; changes when any input changes.
        self.assertEqual(self.printed_digest(*docs), printed)
        changed = {
            "max_risk": (policy(max_risk=0.06, allowedFamilies=docs[0]["allowedFamilies"],
                                minHoldoutSampleCount="1000", maxRegression=0.005),
                         docs[1], docs[2]),
            "candidate id": (docs[0], candidate(20, 2000, "damage-screen-v9"), docs[2]),
            "champion id": (docs[0], docs[1], paired(12, 15, 8, 2000, "damage-screen-v6")),
            "no champion": (docs[0], docs[1]),
        }
        for name, variant in changed.items():
            digest = self.printed_digest(*variant)
            self.assertNotEqual(digest, printed, name)
            self.assertEqual(digest, self.expected_digest(*variant), name)

    def test_snake_case_and_camel_case_files_give_one_digest(self):
        camel = (policy(), candidate(3, 1000))
        snake = ({"max_risk": 0.05, "failure_probability": 0.05},
                 {"id": "damage-screen-v8",
                  "evidence": {"holdout": {"error_count": 3, "sample_count": 1000}}})
        self.assertEqual(self.printed_digest(*camel), self.printed_digest(*snake))


class GateInvalidInputTest(unittest.TestCase):
    def test_typo_in_policy_names_the_field(self):
        doc = policy()
        doc["maxRisc"] = doc.pop("maxRisk")
        code, out, err = gate(doc, candidate(3, 1000))
        self.assertEqual(code, 3)
        self.assertEqual(out, "")
        self.assertIn("policy.maxRisc: unknown field", err)

    def test_typo_deep_in_candidate_names_the_path(self):
        doc = candidate(3, 1000)
        doc["evidence"]["holdout"]["errorCont"] = doc["evidence"]["holdout"].pop("errorCount")
        code, _, err = gate(policy(), doc)
        self.assertEqual(code, 3)
        self.assertIn("candidate.evidence.holdout.errorCont: unknown field", err)

    def test_unknown_family_name_is_named(self):
        code, _, err = gate(policy(allowedFamilies=["BOUND_FAMILY_HOLDOUT_EXACT"]),
                            candidate(3, 1000))
        self.assertEqual(code, 3)
        self.assertIn("policy.allowed_families[0]: unknown value 'BOUND_FAMILY_HOLDOUT_EXACT'", err)

    def test_delta_of_two(self):
        code, out, err = gate(policy(delta=2), candidate(3, 1000))
        self.assertEqual(code, 3)
        self.assertEqual(out, "")
        self.assertIn("policy.failure_probability", err)

    def test_nan_threshold(self):
        code, out, err = gate(policy(max_risk="NaN"), candidate(3, 1000))
        self.assertEqual(code, 3)
        self.assertEqual(out, "")
        self.assertIn("policy.max_risk", err)
        self.assertIn("NaN", err)

    def test_wrong_type_and_bad_json(self):
        code, _, err = gate(policy(max_risk="abc"), candidate(3, 1000))
        self.assertEqual(code, 3)
        self.assertIn("policy.max_risk", err)
        code, _, err = gate('{"maxRisk": 0.05,', candidate(3, 1000))
        self.assertEqual(code, 3)
        self.assertIn("not a JSON object", err)

    def test_paired_counts_off_the_candidate_set(self):
        code, _, err = gate(policy(), candidate(20, 2000), paired(12, 15, 8, 1999))
        self.assertEqual(code, 3)
        self.assertIn("champion.paired.sample_count", err)

    def test_usage_and_unreachable(self):
        p = subprocess.run([harness.ARGS.cli, "gate", "--candidate", FILES.write(candidate(1, 10))],
                           capture_output=True, text=True, timeout=60)
        self.assertEqual(p.returncode, 2)
        self.assertIn("--max-risk", p.stderr)
        self.assertIn("--policy", p.stderr)
        code, _, err = gate(policy(), candidate(3, 1000), None, "--timeout", "2",
                            server=f"127.0.0.1:{harness.free_port_nobody_listens_on()}")
        self.assertEqual(code, 4)
        self.assertIn("cannot reach the server", err)

    def test_help_documents_the_exit_codes(self):
        p = subprocess.run([harness.ARGS.cli, "gate", "--help"], capture_output=True, text=True,
                           timeout=60)
        self.assertEqual(p.returncode, 0)
        self.assertIn("0 PROMOTE, 10 HOLD, 11 REJECT", p.stdout)
        p = subprocess.run([harness.ARGS.cli, "--help"], capture_output=True, text=True, timeout=60)
        self.assertIn("10 gate: verdict HOLD", p.stdout)
        self.assertIn("11 gate: verdict REJECT", p.stdout)


if __name__ == "__main__":
    FILES = Files()
    try:
        harness.main(extra_arguments=["--stubs"])  # directory of the Python stubs
    finally:
        shutil.rmtree(FILES.dir, ignore_errors=True)
