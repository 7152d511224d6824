#!/usr/bin/python3
"""Runs the Node.js client test (client_test.js) against the real
riskbound-server, started on 127.0.0.1:0 by the integration tests' harness
(tests/integration/server_harness.py), so the server's start-up flags live in
one place.

Exit codes: node's (0 when every check passed); 77 (ctest SKIP_RETURN_CODE)
when Node.js is not installed; 1 when its packages were not installed
(scripts/setup runs `npm ci` in tests/node when npm is present).
"""
import argparse
import os
import shutil
import subprocess
import sys

HERE = os.path.dirname(os.path.abspath(__file__))
sys.path.insert(0, os.path.join(HERE, "..", "integration"))
from server_harness import ServerProcess  # noqa: E402

SKIP = 77


def main():
    parser = argparse.ArgumentParser()
    parser.add_argument("--server", required=True)
    parser.add_argument("--proto", required=True, help="the repository's proto/ directory")
    args = parser.parse_args()
    node = shutil.which("node")
    if node is None:
        print("node_client_integration: SKIPPED: Node.js (node) is not on PATH; install "
              "Node.js 18 or later, then run scripts/setup to install the client packages")
        return SKIP
    for package in ("@grpc/grpc-js", "@grpc/proto-loader", "protobufjs"):
        if not os.path.isfile(os.path.join(HERE, "node_modules", package, "package.json")):
            print(f"node_client_integration: {package} is not installed in "
                  f"{os.path.join(HERE, 'node_modules')}: run scripts/setup "
                  f"(it runs `npm ci` in tests/node), or `npm ci` there yourself")
            return 1
    version = subprocess.run([node, "--version"], capture_output=True, text=True).stdout.strip()
    print(f"node {version} at {node}")
    server = ServerProcess(args.server)
    try:
        result = subprocess.run(
            [node, os.path.join(HERE, "client_test.js"), "--address", server.address,
             "--proto", args.proto], timeout=90)
    finally:
        code = server.stop()
    if code != 0:
        print(f"the server exited with {code}:\n{server.logs()}")
        return 1
    return result.returncode


if __name__ == "__main__":
    sys.exit(main())
