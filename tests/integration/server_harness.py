"""Shared by the integration tests: the real riskbound-server as a child
process on an ephemeral loopback port (--listen 127.0.0.1:0, port read back
from --port-file), with its logs, memory and thread figures from /proc.
Tests never use a fixed port."""
import argparse
import os
import signal
import subprocess
import sys
import tempfile
import time
import unittest


def run_module_tests(*extra_arguments):
    """Parses --server, --stubs and each name in extra_arguments (all
    required), then runs the calling module's unittest cases with the rest of
    the command line. Returns the parsed arguments through the module's ARGS
    before the tests run."""
    parser = argparse.ArgumentParser()
    for name in ("--server", "--stubs") + extra_arguments:
        parser.add_argument(name, required=True)
    args, rest = parser.parse_known_args()
    main_module = sys.modules["__main__"]
    main_module.ARGS = args
    unittest.main(module=main_module, argv=[sys.argv[0]] + rest, verbosity=2)


def sanitized(binary):
    """True when binary was built with AddressSanitizer (scripts/sanitize,
    build-sanitize): its resident memory then also holds ASan's shadow memory
    and its quarantine of freed blocks (up to 256 MiB by default), so a
    resident-memory figure says nothing about the server's own use. The
    ordinary build checks those figures."""
    with open(binary, "rb") as f:
        return b"__asan_init" in f.read()


def load_stubs(stubs_dir):
    """Makes the generated riskbound.v1 Python stubs importable."""
    if stubs_dir not in sys.path:
        sys.path.insert(0, stubs_dir)


class ServerProcess:
    """riskbound-server with the given extra flags; stop() sends SIGTERM and
    returns the exit code."""

    def __init__(self, binary, *flags, env=None, log_format="json", log_level="debug",
                 plaintext=True):
        self.dir = tempfile.mkdtemp(prefix="riskbound-it-")
        self.port_file = os.path.join(self.dir, "port")
        self.log = open(os.path.join(self.dir, "server.log"), "w+")
        self.proc = subprocess.Popen(
            [binary, "--listen", "127.0.0.1:0", "--port-file", self.port_file,
             "--log-level", log_level, "--log-format", log_format]
            + (["--plaintext"] if plaintext else []) + list(flags),
            stdout=self.log, stderr=subprocess.STDOUT, env=env)
        deadline = time.monotonic() + 30
        while not os.path.exists(self.port_file):
            if self.proc.poll() is not None or time.monotonic() > deadline:
                raise RuntimeError("server did not start: " + self.logs())
            time.sleep(0.02)
        with open(self.port_file) as f:
            self.port = int(f.read().strip())
        self.address = f"127.0.0.1:{self.port}"

    def logs(self):
        self.log.flush()
        with open(self.log.name) as f:
            return f.read()

    def proc_status(self, key):
        """A number from /proc/PID/status: VmRSS and VmHWM in kB, Threads."""
        with open(f"/proc/{self.proc.pid}/status") as f:
            for line in f:
                if line.startswith(key + ":"):
                    return int(line.split()[1])
        raise KeyError(key)

    def cpu_seconds(self):
        """User plus system CPU time the server has used (from /proc/PID/stat)."""
        with open(f"/proc/{self.proc.pid}/stat") as f:
            fields = f.read().rsplit(")", 1)[1].split()
        ticks = os.sysconf("SC_CLK_TCK")
        return (int(fields[11]) + int(fields[12])) / ticks

    def signal(self, sig):
        self.proc.send_signal(sig)

    def wait(self, timeout):
        return self.proc.wait(timeout=timeout)

    def stop(self, timeout=30):
        if self.proc.poll() is None:
            self.proc.send_signal(signal.SIGTERM)
            try:
                return self.proc.wait(timeout=timeout)
            except subprocess.TimeoutExpired:
                self.proc.kill()
                raise
        return self.proc.returncode
