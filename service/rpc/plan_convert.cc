#include "service/rpc/plan_convert.h"

#include <string>
#include <vector>

#include "absl/strings/str_cat.h"
#include "absl/strings/str_format.h"
#include "service/core/certify.h"
#include "service/core/families.h"
#include "service/core/field_violation.h"
#include "service/rpc/convert.h"
#include "service/rpc/select_convert.h"

namespace riskbound::rpc {

using core::FieldViolation;

std::string PlanPathToWire(const std::string& kind, const std::string& core_path) {
  if (core_path == "held_sample_count") return absl::StrCat(kind, ".held_sample_count");
  return absl::StrCat(kind, ".", core_path);
}

absl::StatusOr<PlanCall> PlanRequestFromProto(const v1::PlanSamplesRequest& in) {
  PlanCall out;
  switch (in.plan_case()) {
    case v1::PlanSamplesRequest::kHoldout: {
      const v1::HoldoutPlanRequest& h = in.holdout();
      core::HoldoutPlanRequest r;
      r.target_risk = h.target_risk();
      r.expected_risk = h.expected_risk();
      r.failure_probability = h.failure_probability();
      if (h.has_pass_probability()) r.pass_probability = h.pass_probability();
      r.held_sample_count = h.held_sample_count();
      out.holdout = r;
      return out;
    }
    case v1::PlanSamplesRequest::kTraining: {
      const v1::TrainingPlanRequest& t = in.training();
      std::vector<FieldViolation> shape;
      core::TrainingPlanRequest r;
      if (t.family() == v1::BOUND_FAMILY_UNSPECIFIED) {
        shape.push_back({"training.family",
                         "required: a training-set family (BOUND_FAMILY_VC_ADDITIVE, "
                         "BOUND_FAMILY_VC_RELATIVE, BOUND_FAMILY_OCCAM_HOEFFDING, "
                         "BOUND_FAMILY_OCCAM_KL)"});
      }
      r.family = static_cast<core::Family>(t.family());
      if (!t.has_capacity() || t.capacity().measure_case() == v1::Capacity::MEASURE_NOT_SET) {
        shape.push_back({"training.capacity",
                         "required: vc_dimension, hypothesis_count, log_hypothesis_count or a "
                         "model description"});
      } else {
        CapacityFromProto(t.capacity(), "training.capacity", &r.capacity, &shape);
      }
      r.expected_empirical_risk = t.expected_empirical_risk();
      r.target_risk = t.target_risk();
      r.failure_probability = t.failure_probability();
      r.held_sample_count = t.held_sample_count();
      if (shape.empty()) {
        out.training = r;
        return out;
      }
      // The core refuses a missing family or capacity before planning, so
      // this probe only collects its other findings.
      const absl::StatusOr<core::TrainingPlan> probe = core::PlanTraining(r);
      return MergeViolations(shape, probe.status(), [](const std::string& p) {
        return PlanPathToWire("training", p);
      });
    }
    case v1::PlanSamplesRequest::PLAN_NOT_SET:
      break;
  }
  return core::InvalidFields(
      {{"plan", "required: give holdout (a hold-out set) or training (a training sample)"}});
}

namespace {

void Finish(v1::PlanSamplesResponse* out) {
  for (const std::string& caution : core::Cautions()) out->add_cautions(caution);
  out->set_engine_version(RISKBOUND_ENGINE_VERSION);
}

}  // namespace

v1::PlanSamplesResponse HoldoutPlanToProto(const core::HoldoutPlan& plan) {
  v1::PlanSamplesResponse out;
  out.set_reachable(plan.reachable);
  out.set_reason(plan.reason);
  out.set_sample_count(plan.sample_count);
  out.set_additional_sample_count(plan.additional_sample_count);
  out.set_rule(plan.rule);
  for (const std::string& note : plan.notes) out.add_notes(note);
  out.set_bound_evaluation_count(plan.bound_evaluation_count);
  v1::HoldoutPlanDetail* d = out.mutable_holdout();
  d->set_tolerated_error_count(plan.tolerated_error_count);
  d->set_zero_failure_sample_count(plan.zero_failure_sample_count);
  d->set_pass_probability_at_plan(plan.pass_probability_at_plan);
  d->set_expected_rate_sample_count(plan.expected_rate_sample_count);
  if (plan.pass_probability_sample_count.has_value()) {
    d->set_pass_probability_sample_count(*plan.pass_probability_sample_count);
  }
  Finish(&out);
  return out;
}

v1::PlanSamplesResponse TrainingPlanToProto(const core::TrainingPlanRequest& request,
                                            const core::TrainingPlan& plan) {
  v1::PlanSamplesResponse out;
  const core::FamilySpec* spec = core::FindFamily(request.family);
  const std::string slug = spec != nullptr ? std::string(spec->slug) : "";
  out.set_reachable(plan.reachable);
  out.set_reason(plan.reason);
  out.set_sample_count(plan.sample_count);
  out.set_additional_sample_count(plan.additional_sample_count);
  if (plan.reachable) {
    const double r = request.expected_empirical_risk;
    out.set_rule(absl::StrFormat(
        "smallest m at which the %s bound at ceil(%g m) training errors is <= %g%s (exact "
        "integer search; formula sheet 9.3)",
        slug, r, request.target_risk,
        r > 0 ? absl::StrFormat(", and stays so for the next ceil(2/%g) samples", r) : ""));
  }
  for (const std::string& note : plan.notes) out.add_notes(note);
  for (const std::string& note : request.capacity.notes) out.add_notes(note);
  out.set_bound_evaluation_count(plan.bound_evaluation_count);
  v1::TrainingPlanDetail* d = out.mutable_training();
  d->set_family(static_cast<v1::BoundFamily>(request.family));
  d->set_family_name(slug);
  v1::ComparisonSampleSizes* c = d->mutable_comparison_only();
  if (plan.realizable_sample_count.has_value()) {
    c->set_realizable_sample_count(*plan.realizable_sample_count);
  }
  if (plan.agnostic_sample_count.has_value()) c->set_agnostic_sample_count(*plan.agnostic_sample_count);
  Finish(&out);
  return out;
}

}  // namespace riskbound::rpc
