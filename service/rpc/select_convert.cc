#include "service/rpc/select_convert.h"

#include <cmath>
#include <optional>
#include <string>
#include <unordered_set>
#include <vector>

#include "absl/strings/match.h"
#include "absl/strings/str_cat.h"
#include "absl/strings/str_replace.h"
#include "service/core/certify.h"
#include "service/core/families.h"
#include "service/core/limits.h"
#include "service/rpc/convert.h"

namespace riskbound::rpc {
namespace {

using core::FieldViolation;

// Inserts `path` and every field above it ("a.b[2].c" -> "a.b[2].c",
// "a.b[2]", "a.b", "a") into `out`.
void InsertSelfAndParents(const std::string& path, std::unordered_set<std::string>* out) {
  out->insert(path);
  for (std::size_t end = path.find_last_of(".[");
       end != std::string::npos && end > 0; end = path.find_last_of(".[", end - 1)) {
    // A parent already present has its own parents present too.
    if (!out->insert(path.substr(0, end)).second) break;
  }
}

// The name of the capacity measure a training-set family reads.
std::string MeasureName(core::Family family) {
  switch (family) {
    case core::Family::kVcAdditive:
    case core::Family::kVcRelative:
      return "vc_dimension";
    default:
      return "log_hypothesis_count";
  }
}

}  // namespace

absl::Status MergeViolations(const std::vector<FieldViolation>& shape,
                             const absl::Status& core_status,
                             const std::function<std::string(const std::string&)>& to_wire) {
  core::ViolationReport from_core = core::ViolationReportOf(core_status);
  if (!core_status.ok() && from_core.listed.empty() && from_core.unlisted_count == 0) {
    return core_status;
  }
  // Linear: every shape path and its parents in one set, then one lookup per
  // core violation (a core path equal to, or above, a shape path is covered).
  std::unordered_set<std::string> covered;
  for (const FieldViolation& s : shape) InsertSelfAndParents(s.field, &covered);
  std::vector<FieldViolation> all = shape;
  for (FieldViolation& v : from_core.listed) {
    std::string path = to_wire(v.field);
    if (covered.count(path) == 0) all.push_back({std::move(path), std::move(v.description)});
  }
  return core::InvalidFields(all, from_core.unlisted_count);
}

std::string SelectPathToWire(const std::string& core_path) {
  if (core_path == "spread") return "delta_spread";
  if (!absl::StartsWith(core_path, "candidates")) return core_path;
  std::string path = absl::StrCat("structure", core_path.substr(std::string("candidates").size()));
  return absl::StrReplaceAll(path, {{"].training.", "]."}});
}

absl::StatusOr<core::SelectRequest> SelectRequestFromProto(
    const v1::SelectStructureRequest& in) {
  std::vector<FieldViolation> shape;
  core::SelectRequest out;
  // Sizes first: an oversized list gets one violation and its entries are
  // never looked at (core/limits.h); the structure cannot be judged without
  // them, so the core is not asked either.
  const bool structure_fits = core::CheckListSize("structure", in.structure_size(),
                                                  core::kMaxStructureCandidates, &shape);
  const bool weights_fit =
      core::CheckListSize("weights", in.weights_size(), core::kMaxStructureWeights, &shape);
  if (!structure_fits || !weights_fit) return core::InvalidFields(shape);
  out.candidates.reserve(in.structure_size());
  // The last capacity of each measure a candidate carries, for the
  // placeholder below.
  std::uint64_t last_vc_dimension = 0;
  double last_log_hypothesis_count = 0.0;
  for (int i = 0; i < in.structure_size(); ++i) {
    const v1::StructureCandidate& c = in.structure(i);
    core::Candidate cand;
    // An id over its cap is named here and reaches the core cut to the cap
    // (the core's own finding on the same path is then left out).
    core::CheckTextSize(absl::StrCat("structure[", i, "].id"), c.id(), core::kMaxIdBytes,
                        &shape);
    cand.id = c.id().substr(0, core::kMaxIdBytes);
    cand.training = core::SampleCounts{c.error_count(), c.sample_count()};
    const std::string prefix = absl::StrCat("structure[", i, "].capacity");
    const std::size_t before = shape.size();
    if (!c.has_capacity() || c.capacity().measure_case() == v1::Capacity::MEASURE_NOT_SET) {
      shape.push_back({prefix,
                       "required: vc_dimension, hypothesis_count, log_hypothesis_count or a "
                       "model description"});
    } else {
      CapacityFromProto(c.capacity(), prefix, &cand.capacity, &shape);
    }
    if (shape.size() > before && absl::StartsWith(shape.back().field, prefix)) {
      // Refused here. For the core's probe (this request is never returned
      // then) the candidate gets the capacity of the one before it: the core
      // neither restates the refusal, which would be counted twice once the
      // core's list is capped, nor judges the nesting differently than it
      // would skip a candidate without capacity.
      cand.capacity.vc_dimension = last_vc_dimension;
      cand.capacity.log_hypothesis_count = last_log_hypothesis_count;
    }
    if (cand.capacity.vc_dimension.has_value()) last_vc_dimension = *cand.capacity.vc_dimension;
    if (const std::optional<double>& h = cand.capacity.log_hypothesis_count;
        h.has_value() && std::isfinite(*h) && *h >= 0.0) {
      last_log_hypothesis_count = *h;
    }
    out.candidates.push_back(std::move(cand));
  }
  if (in.family() == v1::BOUND_FAMILY_UNSPECIFIED) {
    shape.push_back({"family",
                     "required: a training-set family (BOUND_FAMILY_VC_ADDITIVE, "
                     "BOUND_FAMILY_VC_RELATIVE, BOUND_FAMILY_OCCAM_HOEFFDING, "
                     "BOUND_FAMILY_OCCAM_KL)"});
  }
  out.family = static_cast<core::Family>(in.family());
  out.failure_probability = in.failure_probability();
  switch (in.delta_spread()) {
    case v1::DELTA_SPREAD_UNSPECIFIED:
    case v1::DELTA_SPREAD_INVERSE_SQUARE:
      out.spread = core::DeltaSpread::kInverseSquare;
      break;
    case v1::DELTA_SPREAD_UNIFORM:
      out.spread = core::DeltaSpread::kUniform;
      break;
    case v1::DELTA_SPREAD_CALLER_WEIGHTS:
      out.spread = core::DeltaSpread::kCallerWeights;
      break;
    default:
      shape.push_back({"delta_spread", absl::StrCat("unknown value ",
                                                    static_cast<int>(in.delta_spread()))});
      out.spread = core::DeltaSpread::kUniform;  // so the weights are still checked
  }
  out.weights.assign(in.weights().begin(), in.weights().end());
  out.fragility_tolerance =
      in.has_fragility_tolerance() ? in.fragility_tolerance() : kDefaultFragilityTolerance;
  if (shape.empty()) return out;
  // Report the core's findings too, so one call names every bad field. When
  // the core finds nothing more it computes K bounds, which is cheap.
  const absl::StatusOr<core::SelectResult> probe = core::SelectStructure(out);
  return MergeViolations(shape, probe.status(), SelectPathToWire);
}

v1::SelectStructureResponse SelectResponseToProto(const core::SelectRequest& request,
                                                  const core::SelectResult& result) {
  v1::SelectStructureResponse out;
  for (std::size_t i = 0; i < result.candidates.size(); ++i) {
    const core::CandidateResult& c = result.candidates[i];
    v1::CandidateBound* row = out.add_candidates();
    row->set_id(c.id);
    row->set_capacity(c.capacity);
    row->set_empirical_risk(c.empirical_risk);
    row->set_penalty(c.penalty);
    row->set_risk_upper_bound(c.risk_upper_bound);
    row->set_failure_probability(c.failure_probability);
    row->set_vacuous(c.vacuous);
    row->set_delta_weight(c.delta_weight);
    row->set_exact(c.exact);
    for (const std::string& note : c.notes) row->add_notes(note);
    if (i < request.candidates.size()) {
      for (const std::string& note : request.candidates[i].capacity.notes) row->add_notes(note);
    }
  }
  if (!result.candidates.empty()) {
    out.set_chosen_id(result.candidates[result.chosen_index].id);
  }
  out.set_chosen_index(static_cast<std::uint32_t>(result.chosen_index));
  out.set_fragile(result.fragile);
  for (std::size_t i : result.within_tolerance) {
    out.add_within_tolerance_ids(result.candidates[i].id);
  }
  out.set_fragility_tolerance(request.fragility_tolerance);
  out.set_delta_rule(result.delta_rule);
  out.set_spent_failure_probability(result.spent_failure_probability);
  out.set_family(static_cast<v1::BoundFamily>(request.family));
  if (const core::FamilySpec* spec = core::FindFamily(request.family)) {
    out.set_family_name(std::string(spec->slug));
  }
  out.set_capacity_measure(MeasureName(request.family));
  switch (request.spread) {
    case core::DeltaSpread::kUniform:
      out.set_delta_spread(v1::DELTA_SPREAD_UNIFORM);
      break;
    case core::DeltaSpread::kInverseSquare:
      out.set_delta_spread(v1::DELTA_SPREAD_INVERSE_SQUARE);
      break;
    case core::DeltaSpread::kCallerWeights:
      out.set_delta_spread(v1::DELTA_SPREAD_CALLER_WEIGHTS);
      break;
  }
  out.set_requested_failure_probability(request.failure_probability);
  for (const std::string& note : result.notes) out.add_notes(note);
  for (const std::string& caution : core::Cautions()) out.add_cautions(caution);
  out.set_engine_version(RISKBOUND_ENGINE_VERSION);
  return out;
}

}  // namespace riskbound::rpc
