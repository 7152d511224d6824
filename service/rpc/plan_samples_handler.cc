// RiskBound.PlanSamples: convert -> core::PlanHoldout / core::PlanTraining ->
// convert.
#include "service/core/plan.h"
#include "service/rpc/handlers.h"
#include "service/rpc/plan_convert.h"
#include "service/rpc/select_convert.h"

namespace riskbound::rpc {

absl::StatusOr<v1::PlanSamplesResponse> HandlePlanSamples(const v1::PlanSamplesRequest& request,
                                                          const core::StopToken& stop) {
  absl::StatusOr<PlanCall> call = PlanRequestFromProto(request);
  if (!call.ok()) return call.status();
  const std::string kind = call->holdout.has_value() ? "holdout" : "training";
  auto to_wire = [&kind](const std::string& p) { return PlanPathToWire(kind, p); };
  if (call->holdout.has_value()) {
    absl::StatusOr<core::HoldoutPlan> plan = core::PlanHoldout(*call->holdout, stop);
    if (!plan.ok()) return MergeViolations({}, plan.status(), to_wire);
    return HoldoutPlanToProto(*plan);
  }
  absl::StatusOr<core::TrainingPlan> plan = core::PlanTraining(*call->training, stop);
  if (!plan.ok()) return MergeViolations({}, plan.status(), to_wire);
  return TrainingPlanToProto(*call->training, *plan);
}

}  // namespace riskbound::rpc
