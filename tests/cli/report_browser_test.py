#!/usr/bin/python3
"""The HTML report of `riskbound score --report` in a real browser: Debian's
chromium, headless, loads the page from a file with no network, logs no
console error, and its DOM (--dump-dom) holds the counts the CLI printed.
The page is self-contained: no script, no external resource.
Exits 77 (skipped) when chromium is not installed (scripts/setup installs it).
"""
import os
import re
import shutil
import subprocess
import sys
import tempfile
import unittest

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
import harness  # noqa: E402

ROOT = os.path.abspath(os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", ".."))
REGISTRY = os.path.join(ROOT, "examples", "fernhill", "registry", "registry.csv")
POLICY = os.path.join(ROOT, "examples", "fernhill", "gate", "policy.json")
CHROMIUM = shutil.which("chromium")


def count(dom, name):
    m = re.search(r'id="count-%s">(\d+)<' % name, dom)
    return int(m.group(1)) if m else None


class ReportInBrowserTest(unittest.TestCase):
    def test_gate_report_loads_and_holds_the_counts(self):
        tmp = tempfile.mkdtemp(prefix="riskbound-report-")
        report = os.path.join(tmp, "report.html")
        code, out, err = harness.run_cli("score", REGISTRY, "--policy", POLICY, "--output",
                                         "csv", "--report", report)
        self.assertEqual(code, 12, err)  # the demo registry has 3 malformed rows
        m = re.search(r"(\d+) rows \((\d+) PROMOTE, (\d+) HOLD, (\d+) REJECT\); (\d+) error rows",
                      err)
        self.assertIsNotNone(m, err)
        rows, promote, hold, reject, errors = map(int, m.groups())
        # The CSV rows agree with the summary line (brute-force count).
        verdicts = [line.split(",")[6] for line in out.splitlines()[1:]]
        self.assertEqual(verdicts.count("PROMOTE"), promote)
        self.assertEqual(verdicts.count("HOLD"), hold)
        self.assertEqual(verdicts.count("REJECT"), reject)

        with open(report) as f:
            html = f.read()
        for forbidden in ("<script", " src=", " href=", "@import", "url(", "<link"):
            self.assertNotIn(forbidden, html)

        profile = os.path.join(tmp, "profile")
        browser = subprocess.run(
            [CHROMIUM, "--headless", "--no-sandbox", "--disable-gpu", "--no-first-run",
             "--user-data-dir=" + profile, "--enable-logging=stderr", "--v=0",
             "--dump-dom", "file://" + report],
            capture_output=True, text=True, timeout=120)
        self.assertEqual(browser.returncode, 0, browser.stderr[-2000:])
        dom = browser.stdout
        console = [line for line in browser.stderr.splitlines()
                   if "CONSOLE" in line or "Uncaught" in line]
        self.assertEqual(console, [])
        self.assertEqual(count(dom, "rows"), rows)
        self.assertEqual(count(dom, "promote"), promote)
        self.assertEqual(count(dom, "hold"), hold)
        self.assertEqual(count(dom, "reject"), reject)
        self.assertEqual(count(dom, "errors"), errors)
        self.assertIn('id="chart"', dom)
        # One bar per scored model (36 rows minus 3 errors), each with its label.
        self.assertEqual(dom.count("<rect"), promote + hold + reject)
        self.assertEqual(dom.count("<tr><td"), hold + errors)  # HOLD and error tables
        self.assertIn("model-risk review", dom)


if __name__ == "__main__":
    if CHROMIUM is None:
        print("chromium is not installed (scripts/setup installs it): skipped")
        sys.exit(77)
    harness.main()
