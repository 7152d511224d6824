#include "service/rpc/capacity_convert.h"

#include <cmath>
#include <cstdint>
#include <unordered_set>
#include <utility>

#include "absl/strings/match.h"
#include "absl/strings/str_cat.h"
#include "absl/strings/str_format.h"
#include "absl/strings/str_join.h"
#include "service/core/limits.h"

namespace riskbound::rpc {
namespace {

using core::FieldViolation;

// Wire enum <-> core enum, one row per kind (explicit: the core enum has no
// stable numbers of its own).
struct KindRow {
  v1::ModelKind wire;
  core::ModelKind core;
};
constexpr KindRow kKinds[] = {
    {v1::MODEL_KIND_HALFSPACE, core::ModelKind::kHalfspace},
    {v1::MODEL_KIND_POLYNOMIAL_THRESHOLD, core::ModelKind::kPolynomialThreshold},
    {v1::MODEL_KIND_MARGIN_LINEAR, core::ModelKind::kMarginLinear},
    {v1::MODEL_KIND_AXIS_ALIGNED_BOXES, core::ModelKind::kAxisAlignedBoxes},
    {v1::MODEL_KIND_INTERVAL, core::ModelKind::kInterval},
    {v1::MODEL_KIND_UNION_OF_INTERVALS, core::ModelKind::kUnionOfIntervals},
    {v1::MODEL_KIND_DECISION_STUMP, core::ModelKind::kDecisionStump},
    {v1::MODEL_KIND_DECISION_TREE, core::ModelKind::kDecisionTree},
    {v1::MODEL_KIND_VOTED_ENSEMBLE, core::ModelKind::kVotedEnsemble},
    {v1::MODEL_KIND_THRESHOLD_NETWORK, core::ModelKind::kThresholdNetwork},
    {v1::MODEL_KIND_RELU_NETWORK, core::ModelKind::kReluNetwork},
    {v1::MODEL_KIND_SIGMOID_NETWORK, core::ModelKind::kSigmoidNetwork},
    {v1::MODEL_KIND_FINITE_CLASS, core::ModelKind::kFiniteClass},
    {v1::MODEL_KIND_NEAREST_NEIGHBOUR, core::ModelKind::kNearestNeighbour},
    {v1::MODEL_KIND_RBF_KERNEL_NO_MARGIN, core::ModelKind::kRbfKernelNoMargin},
};

constexpr double kTwoTo64 = 18446744073709551616.0;

// "model.layer_widths[1]" -> "<model_path>.layer_widths[1]"; "model" ->
// "<model_path>". Other paths are kept under model_path as they are.
std::string Reroot(const std::string& field, const std::string& model_path) {
  if (field == "model") return model_path;
  if (absl::StartsWith(field, "model.") || absl::StartsWith(field, "model[")) {
    return model_path + field.substr(5);
  }
  return absl::StrCat(model_path, ".", field);
}

// The value for people: an integer when it fits, else %.6g.
std::string FormatCapacity(const core::CapacityEstimate& e) {
  if (!e.exceeds_uint64 && e.vc_dimension < kTwoTo64) {
    return absl::StrCat(static_cast<std::uint64_t>(e.vc_dimension));
  }
  return absl::StrFormat("%.6g", e.vc_dimension);
}

}  // namespace

std::optional<core::ModelDescription> ModelDescriptionFromProto(
    const v1::ModelDescription& in, const std::string& model_path,
    std::vector<FieldViolation>* violations) {
  core::ModelDescription out;
  // Sizes first: an oversized list gets one violation and its entries are
  // never looked at (core/limits.h).
  const bool widths_fit = core::CheckListSize(model_path + ".layer_widths",
                                              static_cast<std::size_t>(in.layer_widths_size()),
                                              core::kMaxLayerWidths, violations);
  bool found = false;
  for (const KindRow& row : kKinds) {
    if (row.wire == in.kind()) {
      out.kind = row.core;
      found = true;
    }
  }
  if (!found) {
    std::vector<std::string> names;
    for (const KindRow& row : kKinds) names.push_back(v1::ModelKind_Name(row.wire));
    violations->push_back(
        {model_path + ".kind",
         in.kind() == v1::MODEL_KIND_UNSPECIFIED
             ? absl::StrCat("required: one of ", absl::StrJoin(names, ", "))
             : absl::StrCat("unknown model kind ", static_cast<int>(in.kind()))});
    return std::nullopt;
  }
  if (!widths_fit) return std::nullopt;
  if (in.has_dimension()) out.dimension = in.dimension();
  if (in.has_with_bias()) out.with_bias = in.with_bias();
  if (in.has_degree()) out.degree = in.degree();
  if (in.has_radius()) out.radius = in.radius();
  if (in.has_margin()) out.margin = in.margin();
  if (in.has_interval_count()) out.interval_count = in.interval_count();
  if (in.has_feature_count()) out.feature_count = in.feature_count();
  if (in.has_leaf_count()) out.leaf_count = in.leaf_count();
  if (in.has_member_count()) out.member_count = in.member_count();
  if (in.has_member_vc_dimension()) out.member_vc_dimension = in.member_vc_dimension();
  if (in.has_weight_count()) out.weight_count = in.weight_count();
  if (in.has_unit_count()) out.unit_count = in.unit_count();
  if (in.has_layer_count()) out.layer_count = in.layer_count();
  out.layer_widths.assign(in.layer_widths().begin(), in.layer_widths().end());
  if (in.has_hypothesis_count()) out.hypothesis_count = in.hypothesis_count();
  if (in.has_description_bits()) out.description_bits = in.description_bits();
  return out;
}

void ModelDescriptionToProto(const core::ModelDescription& in, v1::ModelDescription* out) {
  out->Clear();
  for (const KindRow& row : kKinds) {
    if (row.core == in.kind) out->set_kind(row.wire);
  }
  if (in.dimension) out->set_dimension(*in.dimension);
  if (in.with_bias) out->set_with_bias(*in.with_bias);
  if (in.degree) out->set_degree(*in.degree);
  if (in.radius) out->set_radius(*in.radius);
  if (in.margin) out->set_margin(*in.margin);
  if (in.interval_count) out->set_interval_count(*in.interval_count);
  if (in.feature_count) out->set_feature_count(*in.feature_count);
  if (in.leaf_count) out->set_leaf_count(*in.leaf_count);
  if (in.member_count) out->set_member_count(*in.member_count);
  if (in.member_vc_dimension) out->set_member_vc_dimension(*in.member_vc_dimension);
  if (in.weight_count) out->set_weight_count(*in.weight_count);
  if (in.unit_count) out->set_unit_count(*in.unit_count);
  if (in.layer_count) out->set_layer_count(*in.layer_count);
  for (std::uint64_t w : in.layer_widths) out->add_layer_widths(w);
  if (in.hypothesis_count) out->set_hypothesis_count(*in.hypothesis_count);
  if (in.description_bits) out->set_description_bits(*in.description_bits);
}

std::optional<core::CapacityEstimate> EstimateModel(const v1::ModelDescription& in,
                                                    const std::string& model_path,
                                                    std::vector<FieldViolation>* violations) {
  std::optional<core::ModelDescription> model =
      ModelDescriptionFromProto(in, model_path, violations);
  if (!model.has_value()) return std::nullopt;
  absl::StatusOr<core::CapacityEstimate> estimate = core::EstimateCapacity(*model);
  if (estimate.ok()) return *std::move(estimate);
  core::ViolationReport found = core::ViolationReportOf(estimate.status());
  if (found.listed.empty() && found.unlisted_count == 0) {
    // Not a field error (should not happen): report it on the model itself.
    found.listed.push_back({"model", std::string(estimate.status().message())});
  }
  // The core listed at most kMaxListedViolations (e.g. 1000 zero layer
  // widths): keep one slot for a violation on the model counting the rest,
  // so the count survives into the request's own list.
  std::uint64_t unlisted = found.unlisted_count;
  if (unlisted > 0 && found.listed.size() >= core::kMaxListedViolations) {
    unlisted += found.listed.size() - (core::kMaxListedViolations - 1);
    found.listed.resize(core::kMaxListedViolations - 1);
  }
  for (FieldViolation& v : found.listed) {
    violations->push_back({Reroot(v.field, model_path), std::move(v.description)});
  }
  if (unlisted > 0) {
    violations->push_back(
        {model_path, absl::StrCat("and ", unlisted,
                                  unlisted == 1 ? " more invalid field of this model was "
                                                  "not listed"
                                                : " more invalid fields of this model were "
                                                  "not listed")});
  }
  return std::nullopt;
}

void ModelCapacityFromProto(const v1::ModelDescription& in, const std::string& model_path,
                            core::ClassCapacity* out,
                            std::vector<FieldViolation>* violations) {
  std::optional<core::CapacityEstimate> e = EstimateModel(in, model_path, violations);
  if (!e.has_value()) return;
  std::string kind = "unknown";
  for (const KindRow& row : kKinds) {
    if (row.wire == in.kind()) kind = std::string(core::ModelKindName(row.core));
  }
  if (e->status == core::CapacityStatus::kInfinite) {
    violations->push_back(
        {model_path,
         absl::StrCat("model kind ", kind,
                      " has infinite VC dimension, so no VC or Occam bound applies (",
                      e->source, "); ", absl::StrJoin(e->notes, "; "))});
    return;
  }
  if (e->log_hypothesis_count.has_value()) {
    out->log_hypothesis_count = *e->log_hypothesis_count;
    out->notes.push_back(absl::StrFormat(
        "capacity used: ln |H| = %.6g, from the capacity catalogue for model kind %s (%s; "
        "source: %s)",
        *e->log_hypothesis_count, kind, e->formula, e->source));
    return;
  }
  if (e->exceeds_uint64 || !(e->vc_dimension < kTwoTo64)) {
    violations->push_back(
        {model_path,
         absl::StrFormat("VC dimension bound exceeds 2^64 (%s for model kind %s); the VC "
                         "families would be vacuous — use hold-out bounds",
                         FormatCapacity(*e), kind)});
    return;
  }
  // The catalogue's values are integers already (upper bounds floored after
  // an upward nudge); ceil keeps any non-integer on the safe side.
  out->vc_dimension = static_cast<std::uint64_t>(std::ceil(e->vc_dimension));
  const bool exact = e->status == core::CapacityStatus::kExact;
  out->notes.push_back(absl::StrCat(
      "capacity used: VC dimension ", exact ? "h = " : "h <= ", *out->vc_dimension,
      exact ? " (exact)" : " (an upper bound: the certificate stays valid, only looser)",
      ", from the capacity catalogue for model kind ", kind, " (", e->formula,
      "; source: ", e->source, ")"));
}

void DropRedundantCapacityViolations(std::vector<FieldViolation>* violations) {
  // Every "<path>.capacity" that some violation sits under as
  // "<path>.capacity.model...": one pass over each path's parents, so the
  // cost is linear in the total length of the paths.
  std::unordered_set<std::string> explained;
  for (const FieldViolation& w : *violations) {
    const std::string& f = w.field;
    for (std::size_t end = f.size(); end != std::string::npos && end > 0;
         end = f.find_last_of(".[", end - 1)) {
      const absl::string_view parent(f.data(), end);
      if (absl::EndsWith(parent, "capacity.model") && parent.size() > 6) {
        explained.emplace(parent.substr(0, parent.size() - 6));
      }
      if (end == 0) break;
    }
  }
  if (explained.empty()) return;
  std::vector<FieldViolation> kept;
  kept.reserve(violations->size());
  for (FieldViolation& v : *violations) {
    if (!explained.contains(v.field)) kept.push_back(std::move(v));
  }
  *violations = std::move(kept);
}

void CapacityEstimateToProto(const core::CapacityEstimate& in, v1::CapacityEstimate* out) {
  out->Clear();
  out->set_vc_dimension(in.vc_dimension);
  if (in.status != core::CapacityStatus::kInfinite && !in.exceeds_uint64 &&
      in.vc_dimension < kTwoTo64) {
    out->set_vc_dimension_uint64(static_cast<std::uint64_t>(in.vc_dimension));
  }
  switch (in.status) {
    case core::CapacityStatus::kExact:
      out->set_status(v1::CAPACITY_STATUS_EXACT);
      break;
    case core::CapacityStatus::kUpperBound:
      out->set_status(v1::CAPACITY_STATUS_UPPER_BOUND);
      break;
    case core::CapacityStatus::kInfinite:
      out->set_status(v1::CAPACITY_STATUS_INFINITE);
      break;
  }
  if (in.vc_dimension_lower_bound.has_value()) out->set_vc_dimension_lower_bound(*in.vc_dimension_lower_bound);
  out->set_exceeds_uint64(in.exceeds_uint64);
  out->set_source(in.source);
  out->set_formula(in.formula);
  for (const std::string& note : in.notes) out->add_notes(note);
  if (in.log_hypothesis_count.has_value()) {
    out->set_log_hypothesis_count(*in.log_hypothesis_count);
  }
}

absl::StatusOr<core::ModelDescription> EstimateCapacityRequestFromProto(
    const v1::EstimateCapacityRequest& in) {
  std::vector<FieldViolation> violations;
  if (!in.has_model()) {
    return core::InvalidFields({{"model", "required: the model family and its size"}});
  }
  std::optional<core::ModelDescription> model =
      ModelDescriptionFromProto(in.model(), "model", &violations);
  if (!model.has_value()) return core::InvalidFields(violations);
  return *std::move(model);
}

v1::EstimateCapacityResponse EstimateCapacityResponseToProto(
    const core::CapacityEstimate& estimate) {
  v1::EstimateCapacityResponse out;
  CapacityEstimateToProto(estimate, out.mutable_estimate());
  out.set_engine_version(RISKBOUND_ENGINE_VERSION);
  return out;
}

}  // namespace riskbound::rpc
