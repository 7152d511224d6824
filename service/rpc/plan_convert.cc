#include "service/rpc/plan_convert.h"

#include <string>

#include "service/core/certify.h"
#include "service/core/families.h"
#include "service/rpc/convert.h"
#include "service/rpc/enums.h"

namespace riskbound::rpc {

Converted<core::PlanSamplesRequest> PlanRequestFromProto(const v1::PlanSamplesRequest& in) {
  Converted<core::PlanSamplesRequest> out;
  switch (in.plan_case()) {
    case v1::PlanSamplesRequest::kHoldout: {
      const v1::HoldoutPlanRequest& h = in.holdout();
      core::HoldoutPlanRequest r;
      r.target_risk = h.target_risk();
      r.expected_risk = h.expected_risk();
      r.failure_probability = h.failure_probability();
      if (h.has_pass_probability()) r.pass_probability = h.pass_probability();
      r.held_sample_count = h.held_sample_count();
      out.request.holdout = r;
      break;
    }
    case v1::PlanSamplesRequest::kTraining: {
      const v1::TrainingPlanRequest& t = in.training();
      core::TrainingPlanRequest r;
      r.family = FamilyFromProto(t.family());
      CapacityFromProto(t.capacity(), "training.capacity", &r.capacity, &out.refusals);
      r.expected_empirical_risk = t.expected_empirical_risk();
      r.target_risk = t.target_risk();
      r.failure_probability = t.failure_probability();
      r.held_sample_count = t.held_sample_count();
      out.request.training = std::move(r);
      break;
    }
    case v1::PlanSamplesRequest::PLAN_NOT_SET:
      break;  // the core names the missing plan
  }
  return out;
}

namespace {

// The fields both kinds of plan share.
template <class Plan>
void CommonToProto(const Plan& plan, v1::PlanSamplesResponse* out) {
  out->set_reachable(plan.reachable);
  out->set_reason(plan.reason);
  out->set_sample_count(plan.sample_count);
  out->set_additional_sample_count(plan.additional_sample_count);
  out->set_rule(plan.rule);
  for (const std::string& note : plan.notes) out->add_notes(note);
  out->set_bound_evaluation_count(plan.bound_evaluation_count);
}

}  // namespace

v1::PlanSamplesResponse PlanResponseToProto(const core::PlanSamplesResult& result) {
  v1::PlanSamplesResponse out;
  if (result.holdout.has_value()) {
    const core::HoldoutPlan& plan = *result.holdout;
    CommonToProto(plan, &out);
    v1::HoldoutPlanDetail* d = out.mutable_holdout();
    d->set_tolerated_error_count(plan.tolerated_error_count);
    d->set_zero_failure_sample_count(plan.zero_failure_sample_count);
    d->set_pass_probability_at_plan(plan.pass_probability_at_plan);
    d->set_expected_rate_sample_count(plan.expected_rate_sample_count);
    if (plan.pass_probability_sample_count.has_value()) {
      d->set_pass_probability_sample_count(*plan.pass_probability_sample_count);
    }
  } else if (result.training.has_value()) {
    const core::TrainingPlan& plan = *result.training;
    CommonToProto(plan, &out);
    v1::TrainingPlanDetail* d = out.mutable_training();
    d->set_family(FamilyToProto(plan.family));
    if (const core::FamilySpec* spec = core::FindFamily(plan.family)) {
      d->set_family_name(std::string(spec->family_name));
    }
    v1::ComparisonSampleSizes* c = d->mutable_comparison_only();
    if (plan.realizable_sample_count.has_value()) {
      c->set_realizable_sample_count(*plan.realizable_sample_count);
    }
    if (plan.agnostic_sample_count.has_value()) {
      c->set_agnostic_sample_count(*plan.agnostic_sample_count);
    }
  }
  for (const std::string& caution : core::Cautions()) out.add_cautions(caution);
  out.set_engine_version(RISKBOUND_ENGINE_VERSION);
  return out;
}

}  // namespace riskbound::rpc
