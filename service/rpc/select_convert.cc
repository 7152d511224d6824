#include "service/rpc/select_convert.h"

#include <string>

#include "absl/strings/str_cat.h"
#include "service/core/certify.h"
#include "service/core/families.h"
#include "service/core/limits.h"
#include "service/rpc/convert.h"
#include "service/rpc/enums.h"

namespace riskbound::rpc {

Converted<core::SelectRequest> SelectRequestFromProto(const v1::SelectStructureRequest& in) {
  Converted<core::SelectRequest> out;
  core::SelectRequest& r = out.request;
  // Sizes first: an oversized list is refused and none of its entries is
  // copied (core/limits.h).
  const bool structure_fits =
      out.refusals.RefuseList("structure", in.structure_size(), core::kMaxStructureCandidates);
  if (!structure_fits) out.refusals.skipped.push_back("weights");
  const bool weights_fit =
      out.refusals.RefuseList("weights", in.weights_size(), core::kMaxStructureWeights);
  if (structure_fits) {
    r.structure.reserve(in.structure_size());
    for (int i = 0; i < in.structure_size(); ++i) {
      const v1::StructureCandidate& c = in.structure(i);
      const std::string prefix = absl::StrCat("structure[", i, "]");
      core::StructureCandidate cand;
      out.refusals.RefuseText(prefix + ".id", c.id(), core::kMaxIdBytes);
      cand.id = c.id().substr(0, core::kMaxIdBytes);
      cand.error_count = c.error_count();
      cand.sample_count = c.sample_count();
      CapacityFromProto(c.capacity(), prefix + ".capacity", &cand.capacity, &out.refusals);
      if (c.has_effective_vc_dimension()) cand.effective_vc_dimension = c.effective_vc_dimension();
      r.structure.push_back(std::move(cand));
    }
  }
  r.family = FamilyFromProto(in.family());
  r.failure_probability = in.failure_probability();
  // Unset is the core's default spread. A number this server does not know
  // is a value only the wire can carry: refused here, with the weights
  // (judged by the spread).
  if (in.delta_spread() != v1::DELTA_SPREAD_UNSPECIFIED) {
    r.delta_spread = DeltaSpreadFromProto(in.delta_spread());
    if (!r.delta_spread.has_value()) {
      out.refusals.violations.push_back(
          {"delta_spread", absl::StrCat("unknown value ", static_cast<int>(in.delta_spread()),
                                        ": give uniform, inverse square or caller weights")});
      out.refusals.skipped.push_back("delta_spread");
      out.refusals.skipped.push_back("weights");
    }
  }
  if (weights_fit && structure_fits) r.weights.assign(in.weights().begin(), in.weights().end());
  if (in.has_fragility_tolerance()) r.fragility_tolerance = in.fragility_tolerance();
  r.heuristic = in.heuristic();
  return out;
}

v1::SelectStructureResponse SelectResponseToProto(const core::SelectResult& result) {
  v1::SelectStructureResponse out;
  for (const core::CandidateBound& c : result.candidates) {
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
  }
  out.set_chosen_id(result.chosen_id);
  out.set_chosen_index(static_cast<std::uint32_t>(result.chosen_index));
  out.set_fragile(result.fragile);
  for (const std::string& id : result.within_tolerance_ids) out.add_within_tolerance_ids(id);
  out.set_fragility_tolerance(result.fragility_tolerance);
  out.set_delta_rule(result.delta_rule);
  out.set_spent_failure_probability(result.spent_failure_probability);
  out.set_family(FamilyToProto(result.family));
  if (const core::FamilySpec* spec = core::FindFamily(result.family)) {
    out.set_family_name(std::string(spec->family_name));
  }
  out.set_capacity_measure(result.capacity_measure);
  for (const std::string& note : result.notes) out.add_notes(note);
  for (const std::string& caution : core::Cautions()) out.add_cautions(caution);
  out.set_engine_version(RISKBOUND_ENGINE_VERSION);
  out.set_delta_spread(DeltaSpreadToProto(result.delta_spread));
  out.set_requested_failure_probability(result.requested_failure_probability);
  out.set_heuristic(result.heuristic);
  return out;
}

}  // namespace riskbound::rpc
