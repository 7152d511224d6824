#!/usr/bin/python3
"""Writes the fuzz targets' seed corpus from the example inputs (run from the
repository root after a build; the seeds are committed):

  /usr/bin/python3 tests/fuzz/make_seeds.py build/tests/integration/pygen

rpc_request_fuzz: one byte naming the method, then the request's protobuf
encoding; cli_input_fuzz: one byte naming the reader, then the text.
"""
import csv
import glob
import json
import os
import struct
import sys

sys.path.insert(0, sys.argv[1])
from google.protobuf import json_format  # noqa: E402
from riskbound.v1 import (capacity_pb2, certify_pb2, effective_vc_pb2, families_pb2,  # noqa: E402
                          gate_pb2, plan_pb2, registry_pb2, select_pb2)

ROOT = os.getcwd()
EX = os.path.join(ROOT, "examples", "fernhill")
OUT = os.path.join(ROOT, "tests", "fuzz", "corpus")


def write(target, name, data):
    os.makedirs(os.path.join(OUT, target), exist_ok=True)
    with open(os.path.join(OUT, target, name), "wb") as f:
        f.write(data)


def parse(path, message):
    with open(path) as f:
        return json_format.Parse(f.read(), message)


def main():
    for path in sorted(glob.glob(os.path.join(EX, "models", "*.json"))):
        req = parse(path, certify_pb2.CertifyRequest())
        write("rpc_request_fuzz", "certify-" + os.path.basename(path), b"\x00" + req.SerializeToString())
    with open(os.path.join(EX, "slices", "late-risk-v15.slices.json")) as f:
        req = certify_pb2.CertifyRequest(failure_probability=0.05)
        req.evidence.holdout.error_count, req.evidence.holdout.sample_count = 180, 6000
        for s in json.load(f)["slices"]:
            req.evidence.slices.add(**s)
        req.slice_sharing.rule = 2  # SLICE_SHARE_RULE_SIDAK
    write("rpc_request_fuzz", "certify-slices", b"\x00" + req.SerializeToString())
    req = parse(os.path.join(EX, "requests", "late-risk-net-capacity.json"),
                capacity_pb2.EstimateCapacityRequest())
    write("rpc_request_fuzz", "capacity-relu", b"\x01" + req.SerializeToString())
    policy = parse(os.path.join(EX, "gate", "policy.json"), gate_pb2.GatePolicy())
    for cand in sorted(glob.glob(os.path.join(EX, "gate", "*.candidate.json"))):
        req = gate_pb2.GateRequest(policy=policy)
        parse(cand, req.candidate)
        champ = cand.replace(".candidate.json", ".champion.json")
        if os.path.exists(champ):
            parse(champ, req.champion)
        slices = cand.replace(".candidate.json", ".slices.csv")
        if os.path.exists(slices):  # name,error_count,sample_count,max_risk
            with open(slices) as f:
                for row in csv.DictReader(f):
                    req.candidate.evidence.slices.add(name=row["name"],
                                                      error_count=int(row["error_count"]),
                                                      sample_count=int(row["sample_count"]))
                    req.policy.slice_max_risks.add(slice_name=row["name"],
                                                   max_risk=float(row["max_risk"]))
        write("rpc_request_fuzz", "gate-" + os.path.basename(cand), b"\x02" + req.SerializeToString())
    for path in (os.path.join(EX, "structure.json"),
                 os.path.join(EX, "requests", "label-rules-structure.json"),
                 os.path.join(EX, "requests", "route-trees-fitted-structure.json")):
        req = parse(path, select_pb2.SelectStructureRequest())
        write("rpc_request_fuzz", "select-" + os.path.basename(path), b"\x03" + req.SerializeToString())
    plan = plan_pb2.PlanSamplesRequest()
    plan.holdout.target_risk = 0.05
    plan.holdout.expected_risk = 0.03
    plan.holdout.failure_probability = 0.05
    write("rpc_request_fuzz", "plan-holdout", b"\x04" + plan.SerializeToString())
    req = parse(os.path.join(EX, "requests", "threshold-relabel-draws.json"),
                certify_pb2.CertifyRequest())
    write("rpc_request_fuzz", "certify-relabel-draws", b"\x00" + req.SerializeToString())
    req = parse(os.path.join(EX, "requests", "threshold-deviations.json"),
                effective_vc_pb2.FitEffectiveVcDimensionRequest())
    write("rpc_request_fuzz", "effective-vc", b"\x08" + req.SerializeToString())
    write("rpc_request_fuzz", "list-families", b"\x05" + families_pb2.ListFamiliesRequest().SerializeToString())
    with open(os.path.join(EX, "registry", "registry.jsonl")) as f:
        for i, line in enumerate(f):
            if i >= 6:
                break
            try:
                rec = json_format.Parse(line, registry_pb2.RegistryRecord())
            except json_format.ParseError:
                continue
            rec.holdout_set_id = "s"
            item = registry_pb2.ScoreRegistryRequest(record=rec)
            write("rpc_request_fuzz", f"record-certify-{i}", b"\x06" + item.SerializeToString())
            write("rpc_request_fuzz", f"record-gate-{i}", b"\x07" + item.SerializeToString())

    with open(os.path.join(EX, "registry", "registry.csv"), "rb") as f:
        write("cli_input_fuzz", "csv-registry", b"\x00" + f.read())
    with open(os.path.join(EX, "registry", "june-shortlist.csv"), "rb") as f:
        write("cli_input_fuzz", "csv-shortlist", b"\x00" + f.read())
    with open(os.path.join(EX, "registry", "registry.jsonl"), "rb") as f:
        for i, line in enumerate(f.read().splitlines()[:4]):
            write("cli_input_fuzz", f"jsonl-{i}", b"\x01" + line)
    row = {"line": 2, "result": {"record_id": "a", "certified": {"tightest": {
        "family_name": "holdout-binomial", "risk_upper_bound": 0.01}}}}
    write("cli_input_fuzz", "row-jsonl", b"\x02" + json.dumps(row, separators=(",", ":")).encode())
    write("cli_input_fuzz", "row-csv",
          b"\x02" + b"2,a,m,v1,,gated,HOLD,0.07,0.03,0.05,holdout-binomial,0.025,false,800,,,")
    for path in sorted(glob.glob(os.path.join(EX, "**", "*.json"), recursive=True))[:12]:
        with open(path, "rb") as f:
            write("cli_input_fuzz", "json-" + os.path.basename(path), b"\x03" + f.read())
    write("cli_input_fuzz", "args", b"\x04" + b"\x00".join(
        [b"--delta", b"0.05", b"--families=holdout-kl,vc-additive", b"--size-fixed-in-advance"]))
    for path in sorted(glob.glob(os.path.join(EX, "**", "*.slices.*"), recursive=True)):
        with open(path, "rb") as f:
            write("cli_input_fuzz", "slices-" + os.path.basename(path), b"\x06" + f.read())
    with open(os.path.join(EX, "slices", "bad-slices.csv"), "rb") as f:
        write("cli_input_fuzz", "slices-bad-slices.csv", b"\x06" + f.read())
    write("cli_input_fuzz", "slices-lines.jsonl", b"\x06" + b'{"name": "a\\u00e9", "errorCount": "1", '
          b'"sampleCount": "10", "maxRisk": null}\n{"name": "b", "error_count": 0, "sample_count": 5}\n')
    for i, x in enumerate([0.0019951618622789857, 0.05, 1e-9, 0.5, 1.0, 5e-324]):
        write("cli_input_fuzz", f"round-{i}", b"\x05" + struct.pack("<d", x))


if __name__ == "__main__":
    main()
