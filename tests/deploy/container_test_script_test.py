#!/usr/bin/python3
"""scripts/container-test where no container engine answers: it says so and
exits 77 (documented in the script's header and docs/deploy.md) before it
builds or removes anything. The full run (image build, container, demo
files, SIGTERM) is CI's `scripts/test --container` step."""
import argparse
import os
import subprocess
import sys
import unittest

ARGS = None


class NoEngineTest(unittest.TestCase):
    def run_script(self, *args, engine="riskbound-no-such-container-engine"):
        env = dict(os.environ, RISKBOUND_CONTAINER_ENGINE=engine, RISKBOUND_CLI="/nonexistent")
        return subprocess.run([os.path.join(ARGS.repo, "scripts", "container-test"), *args],
                              env=env, capture_output=True, text=True, timeout=120)

    def test_exit_77_and_says_why(self):
        p = self.run_script()
        self.assertEqual(p.returncode, 77, p.stdout + p.stderr)
        self.assertIn("no container engine answers", p.stdout)
        self.assertIn("riskbound-no-such-container-engine", p.stdout)
        self.assertIn("nothing was tested", p.stdout)

    def test_a_client_without_its_engine_does_not_count(self):
        # `false` stands for a client whose `info` fails (Docker's client with
        # no daemon behind it).
        p = self.run_script(engine="false")
        self.assertEqual(p.returncode, 77, p.stdout + p.stderr)

    def test_usage(self):
        p = self.run_script("--bogus")
        self.assertEqual(p.returncode, 2)
        self.assertIn("usage: scripts/container-test", p.stderr)


if __name__ == "__main__":
    parser = argparse.ArgumentParser()
    parser.add_argument("--repo", required=True)
    ARGS, rest = parser.parse_known_args()
    unittest.main(argv=[sys.argv[0]] + rest, verbosity=2)
