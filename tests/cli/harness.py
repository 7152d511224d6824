"""Shared by the CLI end-to-end tests: a live riskbound-server on an ephemeral
loopback port, and the riskbound binary run against it as a pipeline would.

Usage in a test module:
    import harness
    code, out, err = harness.run_cli("certify", "--errors", "0", "--samples", "300")
    ...
    if __name__ == "__main__":
        harness.main()            # parses --server and --cli, starts the server,
                                  # runs the module's unittest cases, stops it
"""
import argparse
import decimal
import os
import signal
import socket
import subprocess
import sys
import tempfile
import time
import unittest

# Filled by main(): the parsed arguments and the server's "127.0.0.1:PORT".
ARGS = None
ADDRESS = None
# The proto file that defines BoundFamily (for tests that walk the enum).
PROTO_COMMON = os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", "..", "proto",
                            "riskbound", "v1", "common.proto")


def start_server(binary):
    """Starts riskbound-server on 127.0.0.1:0; returns (process, address)."""
    d = tempfile.mkdtemp(prefix="riskbound-cli-")
    port_file = os.path.join(d, "port")
    proc = subprocess.Popen([binary, "--listen", "127.0.0.1:0", "--port_file", port_file,
                             "--plaintext"],
                            stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    deadline = time.monotonic() + 30
    while not os.path.exists(port_file) or os.path.getsize(port_file) == 0:
        if proc.poll() is not None or time.monotonic() > deadline:
            raise RuntimeError("server did not start")
        time.sleep(0.05)
    with open(port_file) as f:
        return proc, f"127.0.0.1:{int(f.read())}"


def free_port_nobody_listens_on():
    s = socket.socket()
    s.bind(("127.0.0.1", 0))
    port = s.getsockname()[1]
    s.close()
    return port


def run_cli(*args, stdin=None, server=True, timeout=60):
    """Runs the CLI; adds --server ADDRESS unless server=False, --help is asked
    or the caller gave --server. Returns (exit code, stdout, stderr)."""
    cmd = [ARGS.cli] + list(args)
    if server and "--help" not in args and "-h" not in args and "--server" not in args:
        cmd += ["--server", ADDRESS]
    p = subprocess.run(cmd, input=stdin, capture_output=True, text=True, timeout=timeout)
    return p.returncode, p.stdout, p.stderr


def _outward(x, up):
    """x's shortest decimal (Python's repr, the same digits the CLI starts
    from) rounded to six decimals, up or down, as the CLI prints a risk.
    Independent of the CLI's C++ formatter: Python's decimal module."""
    d = decimal.Decimal(repr(float(x)))
    q = d.quantize(decimal.Decimal("0.000001"),
                   rounding=decimal.ROUND_CEILING if up else decimal.ROUND_FLOOR)
    return f"{q:.6f}"


def up6(x):
    """An upper bound as the CLI prints it: six decimals, rounded up."""
    return _outward(x, True)


def down6(x):
    """A lower bound as the CLI prints it: six decimals, rounded down."""
    return _outward(x, False)


def up_sig(x, digits=4):
    """A failure probability as the CLI prints it: `digits` significant
    digits rounded up, trailing zeros dropped (plain decimal notation only)."""
    d = decimal.Decimal(repr(float(x)))
    exp = d.adjusted() - (digits - 1)
    q = d.quantize(decimal.Decimal(1).scaleb(exp), rounding=decimal.ROUND_CEILING)
    text = format(q.normalize(), "f")
    return text


def main(extra_arguments=()):
    """Parses --server, --cli and each name in extra_arguments (all required),
    starts the server, runs the calling module's tests, stops the server and
    exits 0 only when every test passed."""
    global ARGS, ADDRESS
    parser = argparse.ArgumentParser()
    parser.add_argument("--server", required=True)
    parser.add_argument("--cli", required=True)
    for name in extra_arguments:
        parser.add_argument(name, required=True)
    ARGS, rest = parser.parse_known_args()
    proc, ADDRESS = start_server(ARGS.server)
    try:
        program = unittest.main(module="__main__", argv=[sys.argv[0]] + rest, verbosity=2,
                                exit=False)
    finally:
        proc.send_signal(signal.SIGTERM)
        proc.wait(timeout=30)
    sys.exit(0 if program.result.wasSuccessful() else 1)
