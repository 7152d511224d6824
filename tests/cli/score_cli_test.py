#!/usr/bin/python3
"""End-to-end tests of `riskbound score` against a live server: one output
row per input row (JSON lines and CSV, good and bad rows), interrupted then
resumed runs byte-identical to uninterrupted ones, per-hold-out-set shares
that never overspend (exact rational arithmetic), several streams across two
replicas (round robin), and exit codes."""
import json
import os
import signal
import subprocess
import sys
import tempfile
import time
import unittest
from fractions import Fraction

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
import harness  # noqa: E402

ROOT = os.path.abspath(os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", ".."))
MAKE_REGISTRY = os.path.join(ROOT, "scripts", "make-registry")
DEMO_CSV = os.path.join(ROOT, "examples", "fernhill", "registry", "registry.csv")
DEMO_JSONL = os.path.join(ROOT, "examples", "fernhill", "registry", "registry.jsonl")
POLICY = os.path.join(ROOT, "examples", "fernhill", "gate", "policy.json")


def make_registry(path, count, fmt, bad_every=0, extra=()):
    subprocess.run(["/usr/bin/python3", MAKE_REGISTRY, str(count), "--format", fmt,
                    "--bad-every", str(bad_every), "--out", path] + list(extra), check=True)


def input_lines(path):
    """(line number, text) of every non-blank line, the CSV header left out."""
    out = []
    with open(path) as f:
        for number, text in enumerate(f, start=1):
            if text.strip():
                out.append((number, text))
    return out[1:] if path.endswith(".csv") else out


def jsonl_rows(text):
    return [json.loads(line) for line in text.splitlines()]


class ScoreRowsTest(unittest.TestCase):
    def setUp(self):
        self.tmp = tempfile.mkdtemp(prefix="riskbound-score-")

    def test_jsonl_one_row_per_input_row_in_order(self):
        code, out, err = harness.run_cli("score", DEMO_JSONL, "--output", "jsonl")
        self.assertEqual(code, 12, err)  # the demo registry has malformed rows
        rows = jsonl_rows(out)
        lines = input_lines(DEMO_JSONL)
        self.assertEqual([r["line"] for r in rows], [n for n, _ in lines])
        for (number, text), row in zip(lines, rows):
            record = json.loads(text)
            self.assertEqual(row["result"].get("record_id"), record["record_id"], number)
        errors = [r for r in rows if "error" in r["result"]]
        self.assertEqual(len(errors), 3)
        self.assertIn("3 error rows", err)

    def test_csv_in_csv_out_with_bad_rows(self):
        code, out, err = harness.run_cli("score", DEMO_CSV, "--output", "csv",
                                         "--policy", POLICY)
        self.assertEqual(code, 12, err)
        out_lines = out.splitlines()
        self.assertTrue(out_lines[0].startswith("line,record_id,"))
        body = out_lines[1:]
        lines = input_lines(DEMO_CSV)
        self.assertEqual(len(body), len(lines))
        for (number, text), row in zip(lines, body):
            cells = row.split(",")
            self.assertEqual(cells[0], str(number))
            self.assertEqual(cells[1], text.split(",")[0])
            self.assertIn(cells[5], ("gated", "error"))
        # The malformed cell is an error row naming its column and line.
        self.assertTrue(any("'twelve' is not a whole number" in r for r in body))

    def test_blank_lines_and_stdin(self):
        text = ('{"record_id": "a", "evidence": {"holdout": {"error_count": 1, '
                '"sample_count": 300}}}\n\n'
                '{"evidence": {"holdout": {"error_count": 0, "sample_count": 300}}}\n'
                'not json\n')
        code, out, err = harness.run_cli("score", "-", "--output", "jsonl", stdin=text)
        self.assertEqual(code, 12, err)
        rows = jsonl_rows(out)
        self.assertEqual([r["line"] for r in rows], [1, 3, 4])
        self.assertEqual(rows[1]["result"]["record_id"], "line-3")
        self.assertIn("error", rows[2]["result"])
        self.assertIn("line 4", rows[2]["result"]["error"]["message"])

    def test_all_good_rows_exit_zero_and_table(self):
        path = os.path.join(self.tmp, "good.jsonl")
        make_registry(path, 25, "jsonl")
        code, out, err = harness.run_cli("score", path)
        self.assertEqual(code, 0, err)
        table = out.splitlines()
        self.assertEqual(table[0].split()[:4], ["line", "record_id", "model", "result"])
        self.assertEqual(len(table), 26)
        self.assertIn("25 rows", err)
        self.assertIn("Cautions:", err)

    def test_bad_header_and_bad_flags(self):
        path = os.path.join(self.tmp, "bad.csv")
        with open(path, "w") as f:
            f.write("record_id,evidence.holdout.errors\nx,1\n")
        code, _, err = harness.run_cli("score", path)
        self.assertEqual(code, 3)
        self.assertIn("evidence.holdout.errors", err)
        code, _, err = harness.run_cli("score", DEMO_CSV, "--streams", "2",
                                       "--holdout-set", "a=3")
        self.assertEqual(code, 2)
        self.assertIn("--streams", err)
        code, _, err = harness.run_cli("score", DEMO_CSV, "--delta-sharing", "sometimes")
        self.assertEqual(code, 2)
        code, _, err = harness.run_cli("score", DEMO_CSV, "--failure-probability", "2")
        self.assertEqual(code, 3)
        self.assertIn("settings.certify.failure_probability", err)


class ResumeTest(unittest.TestCase):
    """Kill the CLI mid-run, then --resume: the final file is byte-identical
    to an uninterrupted run's (brute-force comparison of the two files)."""

    def interrupted_then_resumed(self, fmt, extra=()):
        tmp = tempfile.mkdtemp(prefix="riskbound-resume-")
        source = os.path.join(tmp, "registry." + ("csv" if fmt == "csv" else "jsonl"))
        make_registry(source, 30000, fmt, bad_every=97, extra=extra[:2])
        flags = list(extra[2:])
        whole = os.path.join(tmp, "whole." + fmt)
        code, _, err = harness.run_cli("score", source, "--output", fmt, "--output-file", whole,
                                       *flags, timeout=300)
        self.assertEqual(code, 12, err)
        part = os.path.join(tmp, "part." + fmt)
        proc = subprocess.Popen([harness.ARGS.cli, "score", source, "--output", fmt,
                                 "--output-file", part, "--server", harness.ADDRESS] + flags,
                                stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
        deadline = time.monotonic() + 120
        while time.monotonic() < deadline:
            if os.path.exists(part) and os.path.getsize(part) > 200000:
                break
            time.sleep(0.005)
        proc.send_signal(signal.SIGKILL)
        proc.wait()
        cut = os.path.getsize(part)
        self.assertLess(cut, os.path.getsize(whole), "the run finished before it was killed")
        code, _, err = harness.run_cli("score", source, "--output", fmt, "--resume", part,
                                       *flags, timeout=300)
        self.assertEqual(code, 12, err)
        with open(whole, "rb") as a, open(part, "rb") as b:
            self.assertEqual(a.read(), b.read())
        return whole

    def test_resume_jsonl(self):
        self.interrupted_then_resumed("jsonl")

    def test_resume_csv_gate_mode(self):
        self.interrupted_then_resumed("csv", ("--seed", "7", "--policy", POLICY))

    def test_resume_with_shared_holdout_set_keeps_the_ledger(self):
        # All 30,000 records on one hold-out set declared with K = 30,000:
        # the resumed part re-sends the first part's records as ledger_only,
        # so shares and refusals come out exactly as in one run.
        whole = self.interrupted_then_resumed(
            "jsonl", ("--seed", "11", "--holdout-set", "june=30000",
                      "--delta-sharing", "per-holdout-set"))
        with open(whole) as f:
            rows = [json.loads(line) for line in f]
        shares = [Fraction(r["result"]["failure_probability"]) for r in rows
                  if "error" not in r["result"]]
        # Source: exact rational arithmetic (Python fractions): the shares
        # handed out on one set sum to at most delta.
        self.assertLessEqual(sum(shares), Fraction(0.05))


class SharedDeltaTest(unittest.TestCase):
    def test_shares_per_set_sum_to_at_most_delta(self):
        tmp = tempfile.mkdtemp(prefix="riskbound-shared-")
        path = os.path.join(tmp, "r.csv")
        with open(path, "w") as f:
            f.write("record_id,holdout_set_id,evidence.holdout.error_count,"
                    "evidence.holdout.sample_count\n")
            for i in range(7):
                f.write(f"a{i},spring,{i},2000\n")
            for i in range(3):
                f.write(f"b{i},summer,{i},800\n")
            f.write("c0,summer,1,800\n")  # a 4th record on a set declared with 3
        for delta in ("0.05", "0.1", "1e-9", "0.0123456789"):
            code, out, err = harness.run_cli("score", path, "--output", "jsonl",
                                             "--failure-probability", delta,
                                             "--holdout-set", "spring=7", "--holdout-set",
                                             "summer=3")
            self.assertEqual(code, 12, err)
            rows = jsonl_rows(out)
            by_set = {}
            for r in rows:
                res = r["result"]
                if "error" in res:
                    continue
                by_set.setdefault(res["holdout_set_id"], []).append(
                    Fraction(res["failure_probability"]))
            self.assertEqual(len(by_set["spring"]), 7)
            self.assertEqual(len(by_set["summer"]), 3)
            for shares in by_set.values():
                # Source: exact rational arithmetic (Python fractions).
                self.assertLessEqual(sum(shares), Fraction(float(delta)))
            self.assertEqual(rows[-1]["result"]["error"]["field_violations"][0]["field"],
                             "holdout_set_id")
            self.assertIn("hold together", err)


class ReplicasTest(unittest.TestCase):
    def test_streams_spread_over_two_replicas(self):
        # A second replica whose JSON log counts the streams it served.
        tmp = tempfile.mkdtemp(prefix="riskbound-rr-")
        port_file = os.path.join(tmp, "port")
        log = open(os.path.join(tmp, "second.log"), "w+")
        second = subprocess.Popen([harness.ARGS.server, "--plaintext", "--listen", "127.0.0.1:0",
                                   "--port-file", port_file, "--log-format", "json",
                                   "--log-level", "debug"],
                                  stdout=log, stderr=subprocess.STDOUT)
        try:
            deadline = time.monotonic() + 30
            while not (os.path.exists(port_file) and os.path.getsize(port_file) > 0):
                self.assertLess(time.monotonic(), deadline, "second replica did not start")
                time.sleep(0.05)
            with open(port_file) as f:
                address = f"127.0.0.1:{int(f.read())}"
            path = os.path.join(tmp, "r.jsonl")
            make_registry(path, 2000, "jsonl")
            target = "ipv4:" + harness.ADDRESS + "," + address
            code, out, err = harness.run_cli("score", path, "--output", "jsonl", "--streams",
                                             "4", "--server", target)
            self.assertEqual(code, 0, err)
            rows = jsonl_rows(out)
            self.assertEqual([r["line"] for r in rows], list(range(1, 2001)))
            self.assertEqual(sum(1 for r in rows if "certified" in r["result"]), 2000)
            second.send_signal(signal.SIGTERM)
            second.wait(timeout=30)
            log.flush()
            with open(log.name) as f:
                served = [json.loads(line) for line in f
                          if '"rpc":"ScoreRegistry"' in line.replace(" ", "")]
            # Round robin over two replicas: 4 streams, some on each (common
            # practice: gRPC's round_robin policy picks READY subchannels in
            # turn).
            self.assertGreaterEqual(len(served), 1)
            self.assertLessEqual(len(served), 3)
        finally:
            if second.poll() is None:
                second.kill()


if __name__ == "__main__":
    harness.main()
