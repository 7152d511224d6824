#!/usr/bin/python3
"""The bad-input table: every class of bad input against every RPC of the
real riskbound-server, generated from a table (RPC x input class x field).

The expected outcome of each case is what the proto comments promise for the
field (proto/riskbound/v1/*.proto), written once per field as a predicate on
the value ("in (0, 1)", "finite and >= 0", "in [1, 2^53]"): a value the
comment admits must get an OK answer, any other INVALID_ARGUMENT naming the
field's path in the google.rpc.BadRequest details (proto/riskbound/v1/
README.md, "Errors") and blaming no other field (but the other fields of a
relation it breaks, such as loss_min < loss_max). -0.0 and denormals are therefore valid wherever the
comment's interval admits 0 or tiny positive values. Every OK answer is walked
field by field: no NaN or infinity anywhere, every probability, rate and
bound inside its documented range. After every case the server must still
answer a health check.

Input classes: NaN, +/-Inf, -0.0, 0, a denormal, negative numbers, 1, 1.5,
overflowing values (1e308, DBL_MAX, -1e308), counts 0 / 1 / 2^53 / 2^53 + 1 /
2^63 / 2^64 - 1, errors above samples, delta outside (0, 1), empty and
oversized repeated fields (plain and gzip-compressed), thousands of bad
elements in one repeated field, a gzip-compressed request above
--max-request-bytes, unknown enum numbers, missing oneofs, long strings and
strings with newlines and control characters, garbage and truncated bodies,
and truncated registry streams (cut protobuf messages, streams that end
before their settings, an HTTP/2 DATA frame shorter than its gRPC length
prefix).

Run with --list to print the case count per RPC (docs/api.md states it).
"""
import math
import os
import re
import socket
import struct
import sys
import unittest

import grpc

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
from server_harness import ServerProcess, load_stubs, run_module_tests  # noqa: E402

ARGS = None

NAN = float("nan")
INF = float("inf")
DBL_MAX = sys.float_info.max
DENORMAL = 5e-324  # the smallest positive subnormal double (IEEE 754)
TWO53 = 2**53
U64_MAX = 2**64 - 1

# The double classes, applied to every double field of the table.
DOUBLE_VALUES = [
    ("nan", NAN), ("+inf", INF), ("-inf", -INF), ("-0.0", -0.0), ("0", 0.0),
    ("denormal", DENORMAL), ("negative", -0.25), ("one", 1.0), ("above_one", 1.5),
    ("overflow", 1e308), ("dbl_max", DBL_MAX), ("negative_overflow", -1e308),
]
# The count classes, applied to every uint64 field of the table. A negative
# number sent as int64 reaches a uint64 field as 2^64 - |n| (protobuf varint
# encoding), so 2^64 - 1 is also "-1".
COUNT_VALUES = [
    ("0", 0), ("1", 1), ("2^53", TWO53), ("2^53+1", TWO53 + 1), ("2^63", 2**63),
    ("2^64-1", U64_MAX),
]
UNKNOWN_ENUM_VALUES = [("99", 99), ("-1", -1), ("2^31-1", 2**31 - 1)]


def finite(v):
    return not math.isnan(v) and not math.isinf(v)


# Domains, as the proto comments state them.
def open01(v):
    return 0 < v < 1


def closed01(v):
    return 0 <= v <= 1


def open_closed01(v):
    return 0 < v <= 1


def nonneg_finite(v):
    return finite(v) and v >= 0


def positive_finite(v):
    return finite(v) and v > 0


def sample_count(v):
    return 1 <= v <= TWO53


def gate_delta(v):
    return 1e-300 <= v < 1


def any_value(_):
    return True


def at_most(limit):
    return lambda v: v <= limit


def between(lo, hi):
    return lambda v: lo <= v <= hi


def import_stubs():
    load_stubs(ARGS.stubs)
    global pb, service_grpc, status_pb2, error_details_pb2
    from riskbound.v1 import capacity_pb2, certify_pb2, common_pb2, effective_vc_pb2  # noqa
    from riskbound.v1 import families_pb2, gate_pb2, plan_pb2, registry_pb2, select_pb2  # noqa
    from riskbound.v1 import riskbound_pb2_grpc as service_grpc  # noqa: E402
    from google.rpc import error_details_pb2, status_pb2  # noqa: E402

    class Namespace:
        pass
    pb = Namespace()
    for module in (capacity_pb2, certify_pb2, common_pb2, effective_vc_pb2, families_pb2,
                   gate_pb2, plan_pb2, registry_pb2, select_pb2):
        for name in dir(module):
            if not name.startswith("_"):
                setattr(pb, name, getattr(module, name))


# ---------------------------------------------------------------------------
# Setting a value at a wire path ("structure[1].capacity.vc_dimension").

_PART = re.compile(r"([a-z_0-9]+)(?:\[(\d+)\])?$")


def set_path(message, path, value):
    parts = path.split(".")
    for part in parts[:-1]:
        name, index = _PART.match(part).groups()
        message = getattr(message, name)
        if index is not None:
            message = message[int(index)]
    name, index = _PART.match(parts[-1]).groups()
    if index is not None:
        getattr(message, name)[int(index)] = value
    else:
        setattr(message, name, value)


# ---------------------------------------------------------------------------
# Valid base requests (each a fresh message).

def evidence_holdout(e, errors=3, samples=1000):
    e.holdout.error_count = errors
    e.holdout.sample_count = samples


def evidence_training(e, measure="vc"):
    e.training.error_count = 5
    e.training.sample_count = 2000
    if measure == "vc":
        e.training.capacity.vc_dimension = 10
    elif measure == "hyp":
        e.training.capacity.hypothesis_count = 1000
    else:
        e.training.capacity.log_hypothesis_count = 20.0


def evidence_bounded(e):
    b = e.bounded_loss
    b.mean_loss = 0.3
    b.sample_variance = 0.05
    b.sample_count = 500
    b.loss_min = 0.0
    b.loss_max = 1.0


def evidence_pac_bayes(e):
    p = e.pac_bayes
    p.kl_divergence = 5.0
    p.gibbs_empirical_risk = 0.1
    p.sample_count = 1000
    p.target = pb.PAC_BAYES_TARGET_GIBBS


def evidence_rademacher(e):
    r = e.rademacher
    r.error_count = 10
    r.sample_count = 1000
    r.empirical_rademacher = 0.1


def evidence_compression(e, size=20, outside=10):
    c = e.compression
    c.sample_count = 1000
    c.compression_size = size
    c.outside_error_count = outside


def evidence_relabel(e):
    r = e.relabel
    r.error_count = 10
    r.sample_count = 1000
    r.scheme = pb.RELABEL_SCHEME_RANDOM_SIGNS
    r.training = pb.RELABEL_TRAINING_EXACT
    for k in (450, 460, 470):
        r.draws.add(relabelled_error_count=k)


# (evidence filler, path inside Evidence, domain[, related paths]): a value
# that breaks a relation between fields (loss_min < loss_max, the mean inside
# the range) may be reported on any field of the relation.
EVIDENCE_DOUBLE_SLOTS = [
    (evidence_holdout, "baseline_error_rate", open01),
    ((lambda e: evidence_training(e, "log")),
     "training.capacity.log_hypothesis_count", nonneg_finite),
    (evidence_bounded, "bounded_loss.mean_loss", closed01),
    # Largest unbiased variance of a mean of 0.3 in [0, 1] at n = 500:
    # 0.3 * 0.7 * 500 / 499 (Bhatia & Davis 2000, the variance of a bounded
    # variable with a given mean; n/(n-1) for the unbiased estimator).
    (evidence_bounded, "bounded_loss.sample_variance",
     lambda v: 0 <= v <= 0.3 * 0.7 * 500 / 499),
    (evidence_bounded, "bounded_loss.loss_min", lambda v: finite(v) and v <= 0.3,
     ["bounded_loss.loss_max"]),
    # loss_max: finite, >= mean 0.3, and the variance 0.05 possible in [0,
    # loss_max] at mean 0.3: (loss_max - 0.3) * 0.3 * 500/499 >= 0.05.
    (evidence_bounded, "bounded_loss.loss_max",
     lambda v: finite(v) and v >= 0.3 and (v - 0.3) * 0.3 * 500 / 499 >= 0.05,
     ["bounded_loss.mean_loss", "bounded_loss.sample_variance"]),
    (evidence_pac_bayes, "pac_bayes.kl_divergence", nonneg_finite),
    (evidence_pac_bayes, "pac_bayes.gibbs_empirical_risk", closed01),
    (evidence_rademacher, "rademacher.empirical_rademacher", closed01),
]
EVIDENCE_COUNT_SLOTS = [
    (evidence_holdout, "holdout.error_count", at_most(1000)),
    (lambda e: evidence_holdout(e, errors=0), "holdout.sample_count", sample_count),
    (evidence_training, "training.error_count", at_most(2000)),
    (lambda e: (evidence_training(e), setattr(e.training, "error_count", 0)),
     "training.sample_count", sample_count),
    (evidence_training, "training.capacity.vc_dimension", any_value),
    (lambda e: evidence_training(e, "hyp"), "training.capacity.hypothesis_count",
     lambda v: v >= 1),
    (evidence_bounded, "bounded_loss.sample_count", sample_count),
    (evidence_pac_bayes, "pac_bayes.sample_count", sample_count),
    (evidence_rademacher, "rademacher.error_count", at_most(1000)),
    (evidence_rademacher, "rademacher.sigma_draw_count", any_value),
    (lambda e: evidence_compression(e, 0, 0), "compression.sample_count", sample_count),
    (evidence_compression, "compression.compression_size", at_most(990)),
    (evidence_compression, "compression.outside_error_count", at_most(980)),
    (evidence_relabel, "relabel.draws[1].relabelled_error_count", at_most(1000)),
]
# Errors above samples, by name, for every kind of counted evidence.
ERRORS_ABOVE_SAMPLES = [
    (lambda e: evidence_holdout(e, errors=1001), "holdout.error_count"),
    (lambda e: (evidence_training(e), setattr(e.training, "error_count", 2001)),
     "training.error_count"),
    (lambda e: (evidence_rademacher(e), setattr(e.rademacher, "error_count", 1001)),
     "rademacher.error_count"),
    (lambda e: evidence_compression(e, 1001, 0), "compression.compression_size"),
    (lambda e: evidence_compression(e, 20, 981), "compression.outside_error_count"),
    (lambda e: (evidence_relabel(e), setattr(e.relabel, "error_count", 1001)),
     "relabel.error_count"),
]


def certify_base(fill=evidence_holdout):
    r = pb.CertifyRequest(failure_probability=0.05)
    fill(r.evidence)
    return r


def certify_listed_weight():
    r = certify_base()
    r.listed.families.append(pb.BOUND_FAMILY_HOLDOUT_EXACT_BINOMIAL)
    r.listed.delta_weights.append(0.5)
    return r


def capacity_margin():
    r = pb.EstimateCapacityRequest()
    r.model.kind = pb.MODEL_KIND_MARGIN_LINEAR
    r.model.radius = 1.0
    r.model.margin = 0.1
    return r


def capacity_finite_bits():
    r = pb.EstimateCapacityRequest()
    r.model.kind = pb.MODEL_KIND_FINITE_CLASS
    r.model.description_bits = 20.0
    return r


def capacity_model(kind, **fields):
    def build():
        r = pb.EstimateCapacityRequest()
        r.model.kind = kind
        for k, v in fields.items():
            if k == "layer_widths":
                r.model.layer_widths.extend(v)
            else:
                setattr(r.model, k, v)
        return r
    return build


def select_base(candidates=2, spread=None, weights=()):
    r = pb.SelectStructureRequest(failure_probability=0.05)
    r.family = pb.BOUND_FAMILY_VC_ADDITIVE
    for i in range(candidates):
        c = r.structure.add(id=f"c{i}", error_count=max(0, 50 - 10 * i), sample_count=1000)
        c.capacity.vc_dimension = 5 * (i + 1)
    if spread is not None:
        r.delta_spread = spread
    r.weights.extend(weights)
    return r


def select_occam_log():
    r = select_base(candidates=1)
    r.family = pb.BOUND_FAMILY_OCCAM_KL
    r.structure[0].capacity.log_hypothesis_count = 20.0
    return r


def select_occam_hyp():
    r = select_base(candidates=1)
    r.family = pb.BOUND_FAMILY_OCCAM_KL
    r.structure[0].capacity.hypothesis_count = 1000
    return r


def plan_holdout(**extra):
    def build():
        r = pb.PlanSamplesRequest()
        h = r.holdout
        h.target_risk = 0.05
        h.expected_risk = 0.01
        h.failure_probability = 0.05
        for k, v in extra.items():
            setattr(h, k, v)
        return r
    return build


def plan_training():
    r = pb.PlanSamplesRequest()
    t = r.training
    t.family = pb.BOUND_FAMILY_VC_ADDITIVE
    t.capacity.vc_dimension = 10
    t.expected_empirical_risk = 0.01
    t.target_risk = 0.2
    t.failure_probability = 0.05
    return r


def gate_base(champion=None):
    r = pb.GateRequest()
    r.policy.max_risk = 0.05
    r.policy.failure_probability = 0.05
    r.candidate.id = "candidate"
    evidence_holdout(r.candidate.evidence)
    if champion == "paired":
        r.champion.champion_id = "champion"
        p = r.champion.paired
        p.both_wrong_count = 1
        p.only_champion_wrong_count = 5
        p.only_challenger_wrong_count = 2
        p.sample_count = 1000
    elif champion == "holdout":
        r.champion.champion_id = "champion"
        r.champion.champion_holdout.error_count = 4
        r.champion.champion_holdout.sample_count = 1200
    return r


def gate_with(**policy):
    def build():
        r = gate_base("paired" if "max_regression" in policy else None)
        for k, v in policy.items():
            setattr(r.policy, k, v)
        return r
    return build


def fit_base():
    r = pb.FitEffectiveVcDimensionRequest()
    r.training = pb.RELABEL_TRAINING_EXACT
    r.bootstrap_resample_count = 50
    for n, xs in ((10, (0.9, 0.8, 0.85)), (40, (0.5, 0.45, 0.55)), (160, (0.2, 0.25, 0.22))):
        r.design_points.add(half_sample_count=n, deviations=xs)
    return r


# ---------------------------------------------------------------------------
# The registry stream: a case is its messages; the outcome is the stream's
# status, the first record's result and the summary.

def stream_settings_certify(delta=0.05):
    return pb.ScoreSettings(certify=pb.CertifySettings(failure_probability=delta))


def stream_settings_gate():
    s = pb.ScoreSettings()
    s.gate.max_risk = 0.05
    s.gate.failure_probability = 0.05
    return s


def stream_record(fill=evidence_holdout):
    r = pb.RegistryRecord(record_id="r0", model_name="m", model_version="1")
    fill(r.evidence)
    return r


def stream_shared_settings():
    s = stream_settings_certify()
    s.delta_sharing = pb.DELTA_SHARING_PER_HOLDOUT_SET
    s.holdout_sets.add(holdout_set_id="june", record_count=1)
    return s


def stream_shared_record():
    r = stream_record()
    r.holdout_set_id = "june"
    return r


# ---------------------------------------------------------------------------
# A case.

class Case:
    """One row: an RPC, a class, a field, how to build the body, and what
    must come back: OK (expect_paths None) or `code` with every path of
    expect_paths named."""

    def __init__(self, rpc, klass, field, build, expect_paths=None,
                 code=grpc.StatusCode.INVALID_ARGUMENT, compression=None, raw=None,
                 min_violations=None, stream_where=None, message_contains=None,
                 summary_contains=None, only_named=False):
        self.rpc, self.klass, self.field = rpc, klass, field
        self.build, self.expect_paths, self.code = build, expect_paths, code
        self.compression, self.raw = compression, raw
        self.min_violations = min_violations
        # Stream cases: "settings" (the stream ends) or "record" (a result).
        self.stream_where = stream_where
        self.message_contains = message_contains
        self.summary_contains = summary_contains
        # One bad value: no other field may be blamed for it.
        self.only_named = only_named

    @property
    def ok_expected(self):
        return self.expect_paths is None and self.code == grpc.StatusCode.INVALID_ARGUMENT

    def name(self):
        return f"{self.rpc} / {self.klass} / {self.field}"


def value_cases(rpc, base, path, domain, values, klass_prefix, report_path=None,
                stream_where=None, builder=None, related=()):
    """One case per value: OK when the field's domain admits it, else
    INVALID_ARGUMENT naming report_path (the wire path)."""
    out = []
    for label, value in values:
        def build(base=base, path=path, value=value):
            msg = base()
            set_path(msg, path, value)
            return msg if builder is None else builder(msg)
        valid = domain(value)
        named = [report_path or path] if not related else [
            tuple([report_path or path] + list(related))]
        out.append(Case(rpc, f"{klass_prefix}:{label}", report_path or path,
                        build, None if valid else named, stream_where=stream_where,
                        only_named=True))
    return out


def numeric_slots():
    """(rpc, base, path, domain, kind) for every numeric field of the table;
    kind is 'double' or 'count'."""
    slots = []
    # Certify.
    slots.append(("Certify", certify_base, "failure_probability", open01, "double"))
    slots.append(("Certify", certify_listed_weight, "listed.delta_weights[0]", open_closed01,
                  "double"))
    for fill, path, domain, *related in EVIDENCE_DOUBLE_SLOTS:
        slots.append(("Certify", lambda fill=fill: certify_base(fill), "evidence." + path,
                      domain, "double", ["evidence." + r for r in sum(related, [])]))
    for fill, path, domain in EVIDENCE_COUNT_SLOTS:
        slots.append(("Certify", lambda fill=fill: certify_base(fill), "evidence." + path,
                      domain, "count"))
    # EstimateCapacity.
    slots += [
        # radius 1, margin 0.1; ceil(R^2 / gamma^2) + 1 within the double range.
        ("EstimateCapacity", capacity_margin, "model.radius",
         lambda v: positive_finite(v) and finite((v / 0.1) ** 2), "double", ["model.margin"]),
        ("EstimateCapacity", capacity_margin, "model.margin",
         lambda v: positive_finite(v) and finite((1.0 / v) ** 2), "double"),
        ("EstimateCapacity", capacity_finite_bits, "model.description_bits", nonneg_finite,
         "double"),
        ("EstimateCapacity", capacity_model(pb.MODEL_KIND_HALFSPACE, dimension=10),
         "model.dimension", between(1, TWO53 - 1), "count"),
        ("EstimateCapacity", capacity_model(pb.MODEL_KIND_FINITE_CLASS, hypothesis_count=8),
         "model.hypothesis_count", lambda v: v >= 1, "count"),
        ("EstimateCapacity", capacity_model(pb.MODEL_KIND_DECISION_TREE, leaf_count=8,
                                            feature_count=4),
         "model.leaf_count", between(1, TWO53 - 1), "count"),
        ("EstimateCapacity", capacity_model(pb.MODEL_KIND_VOTED_ENSEMBLE, member_count=10,
                                            member_vc_dimension=3),
         "model.member_vc_dimension", between(0, TWO53 - 1), "count"),
        # Weights from the widths [10, v, 1] (one bias per unit): 12 v + 1,
        # below 10^12.
        ("EstimateCapacity", capacity_model(pb.MODEL_KIND_RELU_NETWORK,
                                            layer_widths=[10, 5, 1]),
         "model.layer_widths[1]", lambda v: 1 <= v and 12 * v + 1 < 10**12, "count"),
    ]
    # SelectStructure.
    slots += [
        ("SelectStructure", select_base, "failure_probability", open01, "double"),
        ("SelectStructure", select_base, "fragility_tolerance", nonneg_finite, "double"),
        ("SelectStructure",
         lambda: select_base(1, pb.DELTA_SPREAD_CALLER_WEIGHTS, [0.5]), "weights[0]",
         open_closed01, "double"),
        ("SelectStructure", select_occam_log, "structure[0].capacity.log_hypothesis_count",
         nonneg_finite, "double"),
        ("SelectStructure", select_base, "structure[0].error_count", at_most(1000), "count"),
        ("SelectStructure",
         lambda: (lambda r: (setattr(r.structure[0], "error_count", 0), r)[1])(select_base()),
         "structure[0].sample_count", sample_count, "count"),
        # Nested classes: capacity must not decrease (5 then 10).
        ("SelectStructure", select_base, "structure[1].capacity.vc_dimension",
         lambda v: v >= 5, "count"),
        ("SelectStructure", select_occam_hyp, "structure[0].capacity.hypothesis_count",
         lambda v: v >= 1, "count"),
    ]
    # PlanSamples. A target of 1 or more is an OK "unreachable" answer.
    slots += [
        ("PlanSamples", plan_holdout(), "holdout.target_risk", positive_finite, "double"),
        ("PlanSamples", plan_holdout(), "holdout.expected_risk", closed01, "double"),
        ("PlanSamples", plan_holdout(), "holdout.failure_probability", open01, "double"),
        ("PlanSamples", plan_holdout(), "holdout.pass_probability", open01, "double"),
        ("PlanSamples", plan_holdout(), "holdout.held_sample_count", at_most(TWO53), "count"),
        ("PlanSamples", plan_training, "training.target_risk", positive_finite, "double"),
        ("PlanSamples", plan_training, "training.expected_empirical_risk", closed01, "double"),
        ("PlanSamples", plan_training, "training.failure_probability", open01, "double"),
        ("PlanSamples", plan_training, "training.capacity.vc_dimension", any_value, "count"),
        ("PlanSamples", plan_training, "training.held_sample_count", at_most(TWO53), "count"),
    ]
    # Gate.
    slots += [
        ("Gate", gate_base, "policy.max_risk", open01, "double"),
        ("Gate", gate_base, "policy.failure_probability", gate_delta, "double"),
        ("Gate", gate_with(max_regression=0.0), "policy.max_regression", between(-1, 1),
         "double"),
        ("Gate", gate_base, "policy.plan_pass_probability", open01, "double"),
        ("Gate", gate_base, "candidate.evidence.baseline_error_rate", open01, "double"),
        ("Gate", gate_base, "policy.min_holdout_sample_count", any_value, "count"),
        ("Gate", gate_base, "candidate.evidence.holdout.error_count", at_most(1000), "count"),
        ("Gate", lambda: (lambda r: (setattr(r.candidate.evidence.holdout, "error_count", 0),
                                     r)[1])(gate_base()),
         "candidate.evidence.holdout.sample_count", sample_count, "count"),
        ("Gate", lambda: gate_base("paired"), "champion.paired.only_challenger_wrong_count",
         lambda v: v == 2, "count"),
        # Counts above a too-small sample_count may be named too.
        ("Gate", lambda: gate_base("paired"), "champion.paired.sample_count",
         lambda v: v == 1000, "count",
         ["champion.paired.only_champion_wrong_count",
          "champion.paired.only_challenger_wrong_count", "champion.paired.both_wrong_count"]),
        ("Gate", lambda: gate_base("holdout"), "champion.champion_holdout.error_count",
         at_most(1200), "count"),
    ]
    # FitEffectiveVcDimension.
    slots += [
        ("FitEffectiveVcDimension", fit_base, "design_points[1].deviations[0]", closed01,
         "double"),
        ("FitEffectiveVcDimension", fit_base, "interval_level", open01, "double"),
        ("FitEffectiveVcDimension", fit_base, "design_points[2].half_sample_count",
         lambda v: 1 <= v <= 2**52 and v not in (10, 40), "count"),
        ("FitEffectiveVcDimension", fit_base, "bootstrap_resample_count", at_most(10000),
         "count"),
    ]
    return slots


class Stream:
    """A registry stream's messages: settings (or anything) first, then
    records; `raw` lists bytes to send instead of messages."""

    def __init__(self, settings, records=(), raw=None):
        self.settings, self.records, self.raw = settings, list(records), raw


def stream_slots():
    """Settings fields (the stream ends naming "settings.<path>") and record
    fields (a per-record error naming the path in the record)."""
    slots = []
    # CertifySettings.failure_probability: "in (0, 1); 0 means 0.05".
    slots.append(("settings", lambda: stream_settings_certify(), "certify.failure_probability",
                  lambda v: v == 0 or open01(v), "double"))
    for path, domain in (("gate.max_risk", open01), ("gate.failure_probability", gate_delta),
                         ("gate.plan_pass_probability", open01)):
        slots.append(("settings", stream_settings_gate, path, domain, "double"))
    slots.append(("settings", stream_shared_settings, "holdout_sets[0].record_count",
                  between(1, 10_000_000), "count"))
    for fill, path, domain, *related in EVIDENCE_DOUBLE_SLOTS:
        slots.append(("record", lambda fill=fill: stream_record(fill), "evidence." + path,
                      domain, "double", ["evidence." + r for r in sum(related, [])]))
    for fill, path, domain in EVIDENCE_COUNT_SLOTS:
        slots.append(("record", lambda fill=fill: stream_record(fill), "evidence." + path,
                      domain, "count"))
    # delta_weight: in (0, 1], 0 = the equal share (one record declared).
    # A weight whose share 0.05 * w rounds to 0 is refused.
    slots.append(("record_shared", stream_shared_record, "delta_weight",
                  lambda v: v == 0 or (open_closed01(v) and 0.05 * v > 0), "double"))
    return slots


def build_cases():
    cases = []
    for rpc, base, path, domain, kind, *related in numeric_slots():
        values = DOUBLE_VALUES if kind == "double" else COUNT_VALUES
        cases += value_cases(rpc, base, path, domain, values, kind,
                             related=sum(related, []))
    for fill, path in ERRORS_ABOVE_SAMPLES:
        cases.append(Case("Certify", "errors_above_samples", "evidence." + path,
                          lambda fill=fill: certify_base(fill), ["evidence." + path]))
    cases.append(Case("SelectStructure", "errors_above_samples", "structure[1].error_count",
                      lambda: (lambda r: (setattr(r.structure[1], "error_count", 1001), r)[1])(
                          select_base()), ["structure[1].error_count"]))
    cases.append(Case("Gate", "errors_above_samples", "champion.champion_holdout.error_count",
                      lambda: (lambda r: (setattr(r.champion.champion_holdout, "error_count",
                                                  1201), r)[1])(gate_base("holdout")),
                      ["champion.champion_holdout.error_count"]))

    # The registry stream.
    for where, base, path, domain, kind, *related in stream_slots():
        related = sum(related, [])
        values = DOUBLE_VALUES if kind == "double" else COUNT_VALUES
        for label, value in values:
            valid = domain(value)
            if where == "settings":
                def build(base=base, path=path, value=value):
                    s = base()
                    set_path(s, path, value)
                    rec = stream_shared_record() if s.holdout_sets else stream_record()
                    return Stream(s, [rec])
                cases.append(Case("ScoreRegistry", f"{kind}:{label}", "settings." + path, build,
                                  None if valid else ["settings." + path],
                                  stream_where="settings"))
            else:
                def build(base=base, path=path, value=value, where=where):
                    r = base()
                    set_path(r, path, value)
                    settings = (stream_shared_settings() if where == "record_shared"
                                else stream_settings_certify())
                    return Stream(settings, [r])
                named = [tuple([path] + related)] if related else [path]
                cases.append(Case("ScoreRegistry", f"{kind}:{label}", "record." + path, build,
                                  None if valid else named, stream_where="record"))
    for fill, path in ERRORS_ABOVE_SAMPLES:
        cases.append(Case("ScoreRegistry", "errors_above_samples", "record.evidence." + path,
                          lambda fill=fill: Stream(stream_settings_certify(),
                                                   [stream_record(fill)]),
                          ["evidence." + path], stream_where="record"))

    cases += enum_cases() + oneof_cases() + repeated_cases() + string_cases() + body_cases()
    return cases


def enum_cases():
    specs = [
        ("Certify", certify_listed_weight, "listed.families[0]"),
        ("Certify", lambda: certify_base(evidence_pac_bayes), "evidence.pac_bayes.target"),
        ("Certify", lambda: certify_base(evidence_relabel), "evidence.relabel.scheme"),
        ("Certify", lambda: certify_base(evidence_relabel), "evidence.relabel.training"),
        ("EstimateCapacity", capacity_margin, "model.kind"),
        ("SelectStructure", select_base, "family"),
        ("SelectStructure", select_base, "delta_spread"),
        ("PlanSamples", plan_training, "training.family"),
        ("Gate", lambda: (lambda r: (r.policy.allowed_families.append(1), r)[1])(gate_base()),
         "policy.allowed_families[0]"),
        ("FitEffectiveVcDimension", fit_base, "training"),
    ]
    cases = []
    for rpc, base, path in specs:
        cases += value_cases(rpc, base, path, lambda v: False, UNKNOWN_ENUM_VALUES, "enum")
    for label, value in UNKNOWN_ENUM_VALUES:
        def build(value=value):
            s = stream_settings_certify()
            s.delta_sharing = value
            return Stream(s, [stream_record()])
        cases.append(Case("ScoreRegistry", f"enum:{label}", "settings.delta_sharing", build,
                          ["settings.delta_sharing"], stream_where="settings"))
        def build_record(value=value):
            return Stream(stream_settings_certify(),
                          [stream_record(lambda e: (evidence_pac_bayes(e),
                                                    setattr(e.pac_bayes, "target", value)))])
        cases.append(Case("ScoreRegistry", f"enum:{label}", "record.evidence.pac_bayes.target",
                          build_record, ["evidence.pac_bayes.target"], stream_where="record"))
    return cases


def oneof_cases():
    def no_capacity():
        r = certify_base(evidence_training)
        r.evidence.training.ClearField("capacity")
        return r

    def select_no_capacity():
        r = select_base()
        r.structure[0].ClearField("capacity")
        return r

    def gate_no_comparison():
        r = gate_base()
        r.champion.champion_id = "champion"
        return r

    def plan_training_no_capacity():
        r = plan_training()
        r.training.ClearField("capacity")
        return r

    specs = [
        ("Certify", lambda: pb.CertifyRequest(failure_probability=0.05), "evidence"),
        ("Certify", no_capacity, "evidence.training.capacity"),
        ("EstimateCapacity", lambda: pb.EstimateCapacityRequest(), "model"),
        ("SelectStructure", select_no_capacity, "structure[0].capacity"),
        ("PlanSamples", lambda: pb.PlanSamplesRequest(), "plan"),
        ("PlanSamples", plan_training_no_capacity, "training.capacity"),
        ("Gate", lambda: pb.GateRequest(), "policy"),
        ("Gate", gate_no_comparison, "champion"),
        ("Gate", lambda: (lambda r: (r.candidate.ClearField("evidence"), r)[1])(gate_base()),
         "candidate.evidence"),
    ]
    cases = [Case(rpc, "missing_oneof", path, base, [path]) for rpc, base, path in specs]
    cases.append(Case("ScoreRegistry", "missing_oneof", "settings.mode",
                      lambda: Stream(pb.ScoreSettings(), [stream_record()]), ["settings"],
                      stream_where="settings"))
    cases.append(Case("ScoreRegistry", "missing_oneof", "item (first message)",
                      lambda: Stream(None, [], raw=[b""]), ["settings"],
                      stream_where="settings"))
    cases.append(Case("ScoreRegistry", "missing_oneof", "record.evidence",
                      lambda: Stream(stream_settings_certify(),
                                     [pb.RegistryRecord(record_id="r0")]),
                      ["evidence"], stream_where="record"))
    cases.append(Case("ScoreRegistry", "missing_oneof", "item (a record)",
                      lambda: Stream(stream_settings_certify(), [], raw=[b""]), ["record"],
                      stream_where="record"))
    return cases


def many(base, extend, count):
    def build():
        msg = base()
        extend(msg, count)
        return msg
    return build


def repeated_cases():
    """Empty, oversized (cap + 1, plain and gzip) and thousands of bad
    elements."""
    cases = []
    empty = [
        ("SelectStructure", lambda: select_base(0), "structure"),
        ("FitEffectiveVcDimension",
         lambda: (lambda r: (r.ClearField("design_points"), r)[1])(fit_base()), "design_points"),
        ("FitEffectiveVcDimension",
         lambda: (lambda r: (r.design_points[0].ClearField("deviations"), r)[1])(fit_base()),
         "design_points[0].deviations"),
        ("Certify", lambda: (lambda r: (r.evidence.relabel.ClearField("draws"), r)[1])(
            certify_base(evidence_relabel)), "evidence.relabel.draws"),
        ("EstimateCapacity",
         capacity_model(pb.MODEL_KIND_RELU_NETWORK, layer_widths=[]), "model.layer_widths"),
    ]
    for rpc, base, path in empty:
        cases.append(Case(rpc, "empty_repeated", path, base, [path]))
    def empty_sets():
        s = stream_settings_certify()
        s.delta_sharing = pb.DELTA_SHARING_PER_HOLDOUT_SET
        return Stream(s, [stream_record()])
    cases.append(Case("ScoreRegistry", "empty_repeated", "settings.holdout_sets", empty_sets,
                      ["settings.holdout_sets"], stream_where="settings"))

    # Oversized: cap + 1 entries of a value that is otherwise fine.
    oversized = [
        ("Certify", certify_base, "listed.families", 64,
         lambda r, n: r.listed.families.extend([1] * n)),
        ("Certify", certify_listed_weight, "listed.delta_weights", 64,
         lambda r, n: r.listed.delta_weights.extend([0.001] * n)),
        ("Certify", lambda: certify_base(evidence_relabel), "evidence.relabel.draws", 100_000,
         lambda r, n: [r.evidence.relabel.draws.add(relabelled_error_count=500)
                       for _ in range(n)]),
        ("Gate", gate_base, "policy.allowed_families", 64,
         lambda r, n: r.policy.allowed_families.extend([1] * n)),
        ("SelectStructure", lambda: select_base(0), "structure", 10_000,
         lambda r, n: [r.structure.add(id=f"c{i}", error_count=1, sample_count=100,
                                       capacity=pb.Capacity(vc_dimension=1))
                       for i in range(n)]),
        ("SelectStructure", lambda: select_base(1, pb.DELTA_SPREAD_CALLER_WEIGHTS), "weights",
         10_000, lambda r, n: r.weights.extend([1e-6] * n)),
        ("EstimateCapacity", capacity_model(pb.MODEL_KIND_RELU_NETWORK),
         "model.layer_widths", 1000, lambda r, n: r.model.layer_widths.extend([1] * n)),
        ("FitEffectiveVcDimension",
         lambda: (lambda r: (r.ClearField("design_points"), r)[1])(fit_base()),
         "design_points", 1000,
         lambda r, n: [r.design_points.add(half_sample_count=i + 1, deviations=[0.5])
                       for i in range(n)]),
        ("FitEffectiveVcDimension", fit_base, "design_points[0].deviations", 100_000,
         lambda r, n: r.design_points[0].deviations.extend([0.5] * n)),
    ]
    for rpc, base, path, cap, extend in oversized:
        for compression, label in ((None, "oversized"), (grpc.Compression.Gzip,
                                                         "oversized_gzip")):
            cases.append(Case(rpc, label, f"{path} ({cap + 1})", many(base, extend, cap + 1),
                              [path], compression=compression))

    def oversized_sets(n):
        def build():
            s = stream_settings_certify()
            s.delta_sharing = pb.DELTA_SHARING_PER_HOLDOUT_SET
            for i in range(n):
                s.holdout_sets.add(holdout_set_id=f"s{i}", record_count=1)
            return Stream(s, [stream_record()])
        return build
    for compression, label in ((None, "oversized"), (grpc.Compression.Gzip, "oversized_gzip")):
        cases.append(Case("ScoreRegistry", label, "settings.holdout_sets (10001)",
                          oversized_sets(10_001), ["settings.holdout_sets"],
                          compression=compression, stream_where="settings"))

    # Above --max-request-bytes (4 MiB after decompression): gzip makes 5 MB
    # of zeros a few kB on the wire.
    cases.append(Case("EstimateCapacity", "oversized_gzip_above_max_request_bytes",
                      "model.layer_widths (5,000,000)",
                      many(capacity_model(pb.MODEL_KIND_RELU_NETWORK),
                           lambda r, n: r.model.layer_widths.extend([0] * n), 5_000_000),
                      None, code=grpc.StatusCode.RESOURCE_EXHAUSTED,
                      compression=grpc.Compression.Gzip))

    # Thousands of bad elements in one repeated field: the first 20 named,
    # every one counted in ErrorInfo.violation_count.
    thousands = [
        ("SelectStructure", lambda: select_base(0), "structure[0].sample_count",
         lambda r, n: [r.structure.add(id=f"c{i}", error_count=0, sample_count=0,
                                       capacity=pb.Capacity(vc_dimension=1))
                       for i in range(n)], 5000),
        ("SelectStructure", lambda: select_base(5000, pb.DELTA_SPREAD_CALLER_WEIGHTS),
         "weights[0]", lambda r, n: r.weights.extend([NAN] * n), 5000),
        ("EstimateCapacity", capacity_model(pb.MODEL_KIND_RELU_NETWORK), "model.layer_widths[0]",
         lambda r, n: r.model.layer_widths.extend([0] * n), 999),
        ("FitEffectiveVcDimension", fit_base, "design_points[0].deviations[3]",
         lambda r, n: r.design_points[0].deviations.extend([NAN] * n), 5000),
    ]
    for rpc, base, first_path, extend, count in thousands:
        cases.append(Case(rpc, "thousands_bad_elements", f"{first_path} (x{count})",
                          many(base, extend, count), [first_path], min_violations=count))
    # Relabel draws: the first 10 bad draws named, then one violation on
    # evidence.relabel.draws standing for the rest (core/certify.cc); every
    # one counted in violation_count.
    cases.append(Case("Certify", "thousands_bad_elements",
                      "evidence.relabel.draws[9].relabelled_error_count (x5000)",
                      many(lambda: (lambda r: (r.evidence.relabel.ClearField("draws"), r)[1])(
                          certify_base(evidence_relabel)),
                           lambda r, n: [r.evidence.relabel.draws.add(relabelled_error_count=5000)
                                         for _ in range(n)], 5000),
                      ["evidence.relabel.draws[9].relabelled_error_count",
                       "evidence.relabel.draws"],
                      summary_contains="4990 more invalid draws", min_violations=5000))
    return cases


def string_cases():
    """Ids at their cap, above it, far above it, empty, and with newlines,
    control characters and direction marks (valid: the comments limit only
    the length)."""
    hostile = "line1\nline2\r\x00\x01\x1b[31m\u202e\ttab"
    values = [
        ("empty", "", False),
        ("256_bytes", "x" * 256, True),
        ("257_bytes", "x" * 257, False),
        ("1_mib", "y" * (1 << 20), False),
        ("newlines_control", hostile, True),
        ("long_with_newlines", hostile * 40, False),
    ]
    specs = [
        ("SelectStructure", select_base, "structure[0].id", True),
        ("Gate", gate_base, "candidate.id", True),
        ("Gate", lambda: gate_base("paired"), "champion.champion_id", True),
    ]
    cases = []
    for rpc, base, path, required in specs:
        for label, value, valid in values:
            def build(base=base, path=path, value=value):
                msg = base()
                set_path(msg, path, value)
                return msg
            cases.append(Case(rpc, f"string:{label}", path, build,
                              None if valid else [path]))
    # The registry stream's record strings: 0 to 256 bytes each (empty fine).
    for path in ("record_id", "model_name", "model_version"):
        for label, value, valid in values:
            def build(path=path, value=value):
                r = stream_record()
                setattr(r, path, value)
                return Stream(stream_settings_certify(), [r])
            cases.append(Case("ScoreRegistry", f"string:{label}", "record." + path, build,
                              None if (valid or value == "") else [path],
                              stream_where="record"))
    for label, value, valid in values:
        def build(value=value):
            s = stream_settings_certify()
            s.delta_sharing = pb.DELTA_SHARING_PER_HOLDOUT_SET
            s.holdout_sets.add(holdout_set_id=value, record_count=1)
            r = stream_record()
            r.holdout_set_id = value
            return Stream(s, [r])
        cases.append(Case("ScoreRegistry", f"string:{label}", "settings.holdout_sets[0]."
                          "holdout_set_id", build,
                          None if valid else ["settings.holdout_sets[0].holdout_set_id"],
                          stream_where="settings"))
    return cases


# Bodies that are not a valid protobuf message (protobuf wire format, open
# standard): a varint that never ends, a length-delimited field longer than
# the body, wire type 7, an end-group tag with no start, a string that is
# not UTF-8.
GARBAGE_BODIES = [
    ("unterminated_varint", b"\xff" * 16),
    ("length_past_end", b"\x0a\x10abc"),
    ("wire_type_7", b"\x0f"),
    ("stray_end_group", b"\x0c"),
    ("seeded_noise", bytes((i * 197 + 89) % 256 for i in range(64)) + b"\xff" * 11),
]
UNARY = ["Certify", "EstimateCapacity", "SelectStructure", "PlanSamples", "Gate",
         "FitEffectiveVcDimension", "ListFamilies"]


def body_cases():
    def truncated(build):
        # The request cut one byte short: its last field's length prefix then
        # runs past the end.
        return lambda: build().SerializeToString()[:-1]

    bases = {"Certify": certify_base, "EstimateCapacity": capacity_margin,
             "SelectStructure": select_base, "PlanSamples": plan_holdout(),
             "Gate": gate_base, "FitEffectiveVcDimension": fit_base}
    cases = []
    for rpc in UNARY:
        for label, body in GARBAGE_BODIES:
            cases.append(Case(rpc, "garbage_body", label, None, [], raw=body,
                              message_contains="could not be decoded"))
        if rpc in bases:
            cases.append(Case(rpc, "truncated_body", "last field cut", None, [],
                              raw=truncated(bases[rpc]), message_contains="could not be decoded"))
    # A string that is not UTF-8: GateRequest.candidate (2) -> id (1) = ff fe.
    cases.append(Case("Gate", "invalid_utf8", "candidate.id", None, [],
                      raw=b"\x12\x04\x0a\x02\xff\xfe", message_contains="could not be decoded"))
    # ListFamilies takes no input: unknown fields are skipped (protobuf).
    cases.append(Case("ListFamilies", "unknown_fields", "field 7", None, None,
                      raw=b"\x38\x01\x42\x03abc"))
    # The registry stream: garbage and truncated messages, first or later;
    # a stream that ends before its settings.
    for label, body in GARBAGE_BODIES:
        cases.append(Case("ScoreRegistry", "garbage_body", "first message " + label,
                          lambda body=body: Stream(None, [], raw=[body]), ["settings"],
                          stream_where="settings"))
        cases.append(Case("ScoreRegistry", "garbage_body", "record " + label,
                          lambda body=body: Stream(stream_settings_certify(), [], raw=[body]),
                          ["record"], stream_where="record"))
    cases.append(Case("ScoreRegistry", "truncated_stream", "settings cut",
                      lambda: Stream(None, [], raw=[pb.ScoreRegistryRequest(
                          settings=stream_settings_certify()).SerializeToString()[:-1]]),
                      ["settings"], stream_where="settings"))
    cases.append(Case("ScoreRegistry", "truncated_stream", "record cut",
                      lambda: Stream(stream_settings_certify(), [], raw=[pb.ScoreRegistryRequest(
                          record=stream_record()).SerializeToString()[:-1]]),
                      ["record"], stream_where="record"))
    cases.append(Case("ScoreRegistry", "truncated_stream", "ends before settings",
                      lambda: Stream(None, [], raw=[]), ["settings"], stream_where="settings"))
    return cases


# ---------------------------------------------------------------------------
# Checks.

# Fields in [0, 1] wherever they appear in an answer.
UNIT_FIELDS = {
    "failure_probability", "empirical_risk", "requested_failure_probability",
    "spent_failure_probability", "pass_probability_at_plan", "mcnemar_p_value",
    "delta_weight", "interval_level", "mean_deviation", "fitted_deviation",
}
RISK_FIELDS = {"risk_upper_bound", "risk_lower_bound"}
SIGNED_UNIT_FIELDS = {"difference_upper_bound", "difference_lower_bound", "residual"}


def check_answer(test, message, where="", loss_range=None):
    """No NaN or infinity anywhere; every probability and bound in range."""
    from google.protobuf.descriptor import FieldDescriptor as F
    if message.DESCRIPTOR.name == "Certificate" and message.HasField("loss_range"):
        loss_range = (message.loss_range.loss_min, message.loss_range.loss_max)
    for field, value in message.ListFields():
        path = f"{where}.{field.name}" if where else field.name
        values = value if field.label == F.LABEL_REPEATED else [value]
        for v in values:
            if field.type == F.TYPE_MESSAGE:
                check_answer(test, v, path, loss_range)
            elif field.type in (F.TYPE_DOUBLE, F.TYPE_FLOAT):
                test.assertTrue(finite(v), f"{path} = {v}")
                if field.name in RISK_FIELDS or (field.name in ("empirical_risk", "penalty")
                                                 and loss_range is not None):
                    lo, hi = loss_range if loss_range is not None else (0.0, 1.0)
                    if field.name == "penalty":
                        test.assertGreaterEqual(v, 0.0, path)
                    else:
                        test.assertTrue(lo <= v <= hi, f"{path} = {v} outside [{lo}, {hi}]")
                elif field.name in UNIT_FIELDS:
                    test.assertTrue(0.0 <= v <= 1.0, f"{path} = {v} outside [0, 1]")
                elif field.name in SIGNED_UNIT_FIELDS:
                    test.assertTrue(-1.0 <= v <= 1.0, f"{path} = {v} outside [-1, 1]")
                elif field.name in ("vc_dimension", "vc_dimension_lower_bound",
                                    "log_hypothesis_count", "effective_vc_dimension",
                                    "penalty", "capacity", "fragility_tolerance"):
                    test.assertGreaterEqual(v, 0.0, path)
    if message.DESCRIPTOR.name == "Certificate":
        test.assertLessEqual(message.empirical_risk, message.risk_upper_bound, where)
        if message.HasField("risk_lower_bound"):
            test.assertLessEqual(message.risk_lower_bound, message.empirical_risk, where)
    if message.DESCRIPTOR.name == "FitEffectiveVcDimensionResponse":
        test.assertLessEqual(message.interval_lower, message.interval_upper)


def error_details(err):
    """The BadRequest violations and ErrorInfo metadata of an error."""
    raw = dict(err.trailing_metadata() or ()).get("grpc-status-details-bin")
    if raw is None:
        return [], {}
    status = status_pb2.Status.FromString(raw)
    violations, info = [], {}
    for detail in status.details:
        bad = error_details_pb2.BadRequest()
        if detail.Unpack(bad):
            violations += [(v.field, v.description) for v in bad.field_violations]
        ei = error_details_pb2.ErrorInfo()
        if detail.Unpack(ei):
            info = dict(ei.metadata)
            info["reason"] = ei.reason
    return violations, info


def named(path, fields):
    """A path is named by itself or, for a message, by a field inside it;
    a tuple of paths (one relation between fields) by any of them."""
    if isinstance(path, tuple):
        return any(named(p, fields) for p in path)
    return any(f == path or f.startswith(path + ".") or f.startswith(path + "[")
               for f in fields)


def flat(paths):
    for p in paths:
        yield from (p if isinstance(p, tuple) else (p,))


def check_only_named(test, case, fields, violations):
    if not case.only_named:
        return
    allowed = list(flat(case.expect_paths))
    for f in fields:
        test.assertTrue(any(named(a, [f]) or named(f, [a]) for a in allowed),
                        f"{case.name()}: {f} blamed as well: {violations}")


def check_named(test, case, violations, info):
    fields = [f for f, _ in violations]
    for path in case.expect_paths:
        test.assertTrue(named(path, fields), f"{case.name()}: {path} not in {violations}")
    check_only_named(test, case, fields, violations)
    if case.summary_contains:
        test.assertTrue(any(case.summary_contains in d for _, d in violations), violations)
    for field, description in violations:
        test.assertIsNone(re.search(r"[\x00-\x1f\x7f]", field + description),
                          f"{case.name()}: control character in {field!r}")
    if violations:
        test.assertEqual(info.get("reason"), "INVALID_FIELDS")
        test.assertEqual(int(info["listed_violation_count"]),
                         len([f for f in fields if f != "request"]))
    if case.min_violations is not None:
        test.assertGreaterEqual(int(info["violation_count"]), case.min_violations)
        test.assertLessEqual(len(violations), 21)
        test.assertEqual(fields[-1], "request")


def health_check(channel):
    """grpc.health.v1.Health/Check for the service (open standard:
    grpc/health/v1/health.proto; SERVING = 1)."""
    check = channel.unary_unary("/grpc.health.v1.Health/Check",
                                request_serializer=lambda b: b,
                                response_deserializer=lambda b: b)
    name = b"riskbound.v1.RiskBound"
    return check(b"\x0a" + bytes([len(name)]) + name, timeout=10) == b"\x08\x01"


def run_unary(test, channel, case):
    method = channel.unary_unary(f"/riskbound.v1.RiskBound/{case.rpc}",
                                 request_serializer=lambda b: b,
                                 response_deserializer=lambda b: b)
    if case.raw is not None:
        body = case.raw() if callable(case.raw) else case.raw
    else:
        body = case.build().SerializeToString()
    try:
        answer = method(body, timeout=60, compression=case.compression)
    except grpc.RpcError as err:
        if case.ok_expected:
            test.fail(f"{case.name()}: expected OK, got {err.code()}: {err.details()}")
        test.assertEqual(err.code(), case.code, f"{case.name()}: {err.details()}")
        if case.message_contains:
            test.assertIn(case.message_contains, err.details())
        if case.code == grpc.StatusCode.INVALID_ARGUMENT:
            violations, info = error_details(err)
            check_named(test, case, violations, info)
        return
    if not case.ok_expected:
        test.fail(f"{case.name()}: expected {case.code} naming {case.expect_paths}, got OK")
    response_type = {"Certify": pb.CertifyResponse,
                     "EstimateCapacity": pb.EstimateCapacityResponse,
                     "SelectStructure": pb.SelectStructureResponse,
                     "PlanSamples": pb.PlanSamplesResponse, "Gate": pb.GateResponse,
                     "FitEffectiveVcDimension": pb.FitEffectiveVcDimensionResponse,
                     "ListFamilies": pb.ListFamiliesResponse}[case.rpc]
    check_answer(test, response_type.FromString(answer))


def run_stream(test, channel, case):
    method = channel.stream_stream("/riskbound.v1.RiskBound/ScoreRegistry",
                                   request_serializer=lambda b: b,
                                   response_deserializer=pb.ScoreRegistryResponse.FromString)
    stream = case.build()
    bodies = []
    if stream.settings is not None:
        bodies.append(pb.ScoreRegistryRequest(settings=stream.settings).SerializeToString())
    bodies += [pb.ScoreRegistryRequest(record=r).SerializeToString() for r in stream.records]
    bodies += stream.raw or []
    answers = []
    try:
        for answer in method(iter(bodies), timeout=60, compression=case.compression):
            answers.append(answer)
    except grpc.RpcError as err:
        if case.stream_where != "settings" or case.ok_expected:
            test.fail(f"{case.name()}: the stream ended with {err.code()}: {err.details()}")
        test.assertEqual(err.code(), case.code, f"{case.name()}: {err.details()}")
        test.assertEqual(answers, [], case.name())
        violations, info = error_details(err)
        check_named(test, case, violations, info)
        return
    if case.stream_where == "settings" and not case.ok_expected:
        test.fail(f"{case.name()}: expected the stream to end naming {case.expect_paths}")
    test.assertTrue(answers and answers[-1].HasField("summary"), case.name())
    check_answer(test, answers[-1].summary)
    results = [a.result for a in answers[:-1]]
    if case.stream_where == "record" and not case.ok_expected:
        test.assertEqual(len(results), 1, case.name())
        test.assertEqual(results[0].WhichOneof("outcome"), "error", case.name())
        test.assertEqual(results[0].error.code, "INVALID_ARGUMENT")
        violations = [(v.field, v.description) for v in results[0].error.field_violations]
        fields = [f for f, _ in violations]
        for path in case.expect_paths:
            test.assertTrue(named(path, fields), f"{case.name()}: {path} not in {violations}")
        check_only_named(test, case, fields, violations)
        return
    for r in results:
        test.assertNotEqual(r.WhichOneof("outcome"), "error",
                            f"{case.name()}: {r.error.message}")
        check_answer(test, r)


# ---------------------------------------------------------------------------
# HTTP/2 below gRPC: a DATA frame shorter than the gRPC length prefix it
# carries, then END_STREAM (RFC 7540 framing, RFC 7541 literal header
# fields without Huffman coding, gRPC's length-prefixed messages from
# doc/PROTOCOL-HTTP2.md: open standards).

def _frame(kind, flags, stream_id, payload):
    return struct.pack(">I", len(payload))[1:] + bytes([kind, flags]) + struct.pack(
        ">I", stream_id) + payload


def _literal(name, value):
    def string(s):
        assert len(s) < 127
        return bytes([len(s)]) + s
    return b"\x00" + string(name) + string(value)


def truncated_http2_call(port, method, prefix_length, body):
    """Sends one call whose gRPC message claims prefix_length bytes and
    carries body, then ends the stream; returns the frame types the server
    sent on stream 1 (HEADERS 1, RST_STREAM 3) before it closed it."""
    sock = socket.create_connection(("127.0.0.1", port), timeout=10)
    try:
        headers = b"".join(_literal(n, v) for n, v in (
            (b":method", b"POST"), (b":scheme", b"http"), (b":path", method),
            (b":authority", b"127.0.0.1"), (b"content-type", b"application/grpc"),
            (b"te", b"trailers")))
        grpc_message = b"\x00" + struct.pack(">I", prefix_length) + body
        sock.sendall(b"PRI * HTTP/2.0\r\n\r\nSM\r\n\r\n" + _frame(4, 0, 0, b"")
                     + _frame(1, 0x4, 1, headers) + _frame(0, 0x1, 1, grpc_message))
        seen, buffer = [], b""
        while True:
            while len(buffer) < 9:
                chunk = sock.recv(65536)
                if not chunk:
                    return seen
                buffer += chunk
            length = int.from_bytes(buffer[:3], "big")
            while len(buffer) < 9 + length:
                chunk = sock.recv(65536)
                if not chunk:
                    return seen
                buffer += chunk
            kind, flags = buffer[3], buffer[4]
            stream_id = int.from_bytes(buffer[5:9], "big") & 0x7FFFFFFF
            buffer = buffer[9 + length:]
            if kind == 4 and not flags & 0x1:  # the server's SETTINGS: acknowledge
                sock.sendall(_frame(4, 0x1, 0, b""))
            if stream_id == 1:
                seen.append(kind)
                if kind == 3 or (kind == 1 and flags & 0x1):
                    return seen
            if kind == 7:  # GOAWAY
                seen.append(kind)
                return seen
    finally:
        sock.close()


# ---------------------------------------------------------------------------

class BadInputTableTest(unittest.TestCase):
    @classmethod
    def setUpClass(cls):
        import_stubs()
        cls.cases = build_cases()
        cls.server = ServerProcess(ARGS.server, "--log-level", "warn")
        cls.channel = grpc.insecure_channel(cls.server.address)
        grpc.channel_ready_future(cls.channel).result(timeout=20)

    @classmethod
    def tearDownClass(cls):
        cls.channel.close()
        code = cls.server.stop()
        assert code == 0, code

    def run_rpc(self, rpc):
        cases = [c for c in self.cases if c.rpc == rpc]
        self.assertTrue(cases)
        for case in cases:
            with self.subTest(case=case.name()):
                if rpc == "ScoreRegistry":
                    run_stream(self, self.channel, case)
                else:
                    run_unary(self, self.channel, case)
            self.assertTrue(health_check(self.channel), f"after {case.name()}")
            self.assertIsNone(self.server.proc.poll(), f"server exited after {case.name()}")

    def test_certify(self):
        self.run_rpc("Certify")

    def test_estimate_capacity(self):
        self.run_rpc("EstimateCapacity")

    def test_select_structure(self):
        self.run_rpc("SelectStructure")

    def test_plan_samples(self):
        self.run_rpc("PlanSamples")

    def test_gate(self):
        self.run_rpc("Gate")

    def test_fit_effective_vc_dimension(self):
        self.run_rpc("FitEffectiveVcDimension")

    def test_list_families(self):
        self.run_rpc("ListFamilies")

    def test_score_registry(self):
        self.run_rpc("ScoreRegistry")

    def test_truncated_http2_messages(self):
        # Every unary method and the stream: the prefix promises 100 bytes,
        # 3 arrive, then END_STREAM. The call must end (trailers or
        # RST_STREAM), not hang, and the server stays up.
        for rpc in UNARY + ["ScoreRegistry"]:
            with self.subTest(rpc=rpc):
                seen = truncated_http2_call(self.server.port,
                                            f"/riskbound.v1.RiskBound/{rpc}".encode(), 100,
                                            b"\x0a\x01a")
                self.assertTrue(seen and seen[-1] in (1, 3, 7), (rpc, seen))
                self.assertTrue(health_check(self.channel))

    def test_docs_state_the_case_count(self):
        total = len(self.cases) + len(UNARY) + 1  # plus the HTTP/2 truncations
        with open(os.path.join(ARGS.source, "docs", "api.md")) as f:
            text = f.read()
        self.assertIn(f"bad-input table** ({total} cases", text)


def list_cases():
    import collections
    cases = build_cases()
    by_rpc = collections.Counter(c.rpc for c in cases)
    for rpc, n in sorted(by_rpc.items()):
        print(f"{rpc:26} {n}")
    by_class = collections.Counter(c.klass.split(":")[0] for c in cases)
    for klass, n in sorted(by_class.items()):
        print(f"  {klass:40} {n}")
    print("http2 truncations", len(UNARY) + 1)
    print("total", len(cases) + len(UNARY) + 1)


if __name__ == "__main__":
    if "--list" in sys.argv:
        sys.argv.remove("--list")
        import argparse
        parser = argparse.ArgumentParser()
        parser.add_argument("--stubs", required=True)
        known, _ = parser.parse_known_args()
        ARGS = known
        import_stubs()
        list_cases()
    else:
        run_module_tests("--source")
