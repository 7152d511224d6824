#!/usr/bin/python3
"""bench/registry_bench.py: a registry run end to end, against the in-process
baseline measured in the same run (a benchmark, not a test).

  /usr/bin/python3 bench/registry_bench.py --build build [--records 1000000]
      [--streams 1] [--mode certify|gate]

1. writes a synthetic registry (scripts/make-registry, JSON lines);
2. starts riskbound-server on loopback (--plaintext) and runs
   `riskbound score FILE --output-file OUT` over it, timing the whole run and
   reading the peak RSS of the client (wait4) and of the server (VmHWM);
3. runs bench/registry_core_bench on the same file: the same records scored
   in one process with no transport (ScoreRecord);
4. prints records/s of both, their ratio (target >= 0.5) and the RSS figures,
   as one JSON object.
"""
import argparse
import json
import os
import subprocess
import sys
import tempfile
import time

ROOT = os.path.abspath(os.path.join(os.path.dirname(os.path.abspath(__file__)), ".."))


def vm(pid, key):
    with open(f"/proc/{pid}/status") as f:
        for line in f:
            if line.startswith(key + ":"):
                return int(line.split()[1])
    return None


def main():
    p = argparse.ArgumentParser()
    p.add_argument("--build", default=os.path.join(ROOT, "build"))
    p.add_argument("--records", type=int, default=1000000)
    p.add_argument("--streams", type=int, default=1)
    p.add_argument("--mode", choices=["certify", "gate"], default="certify")
    a = p.parse_args()
    tmp = tempfile.mkdtemp(prefix="riskbound-bench-")
    registry = os.path.join(tmp, "registry.jsonl")
    subprocess.run(["/usr/bin/python3", os.path.join(ROOT, "scripts", "make-registry"),
                    str(a.records), "--out", registry], check=True)

    server_bin = os.path.join(a.build, "service", "riskbound-server")
    cli = os.path.join(a.build, "client_cli", "riskbound")
    port_file = os.path.join(tmp, "port")
    server = subprocess.Popen([server_bin, "--plaintext", "--listen", "127.0.0.1:0",
                               "--port-file", port_file, "--log-level", "error"],
                              stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    try:
        while not (os.path.exists(port_file) and os.path.getsize(port_file) > 0):
            time.sleep(0.02)
        address = "127.0.0.1:" + open(port_file).read().strip()
        server_rss_start = vm(server.pid, "VmRSS")
        mode = ["--max-risk", "0.05"] if a.mode == "gate" else []
        out = os.path.join(tmp, "rows.jsonl")
        start = time.monotonic()
        client = subprocess.Popen([cli, "score", registry, "--output-file", out, "--server",
                                   address, "--streams", str(a.streams)] + mode,
                                  stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
        _, status, usage = os.wait4(client.pid, 0)
        seconds = time.monotonic() - start
        code = os.waitstatus_to_exitcode(status)
        server_hwm = vm(server.pid, "VmHWM")
        with open(out) as f:
            rows = sum(1 for _ in f)
    finally:
        server.terminate()
        server.wait(timeout=30)
    baseline_args = [os.path.join(a.build, "bench", "registry_core_bench"), registry]
    if a.mode == "gate":
        baseline_args += ["--gate-max-risk", "0.05"]
    baseline = json.loads(subprocess.run(baseline_args, check=True, capture_output=True,
                                         text=True).stdout)
    end_to_end = a.records / seconds
    print(json.dumps({
        "records": a.records, "mode": a.mode, "streams": a.streams, "exit_code": code,
        "rows_written": rows,
        "end_to_end_records_per_second": round(end_to_end),
        "in_process_records_per_second": round(baseline["records_per_second"]),
        "ratio": round(end_to_end / baseline["records_per_second"], 3),
        "client_peak_rss_mib": round(usage.ru_maxrss / 1024, 1),
        "server_rss_at_start_mib": round(server_rss_start / 1024, 1),
        "server_peak_rss_mib": round(server_hwm / 1024, 1),
    }, indent=1))
    return 0 if rows == a.records else 1


if __name__ == "__main__":
    sys.exit(main())
