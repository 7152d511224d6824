// RiskBound.PlanSamples: convert -> core::PlanSamples -> convert.
#include "service/core/plan.h"
#include "service/rpc/handlers.h"
#include "service/rpc/plan_convert.h"

namespace riskbound::rpc {

absl::StatusOr<v1::PlanSamplesResponse> HandlePlanSamples(const v1::PlanSamplesRequest& request,
                                                          const CallInfo& call) {
  const Converted<core::PlanSamplesRequest> in = PlanRequestFromProto(request);
  if (!in.refusals.empty()) {
    return WithRefusals(in.refusals, core::ValidatePlanSamplesRequest(in.request));
  }
  absl::StatusOr<core::PlanSamplesResult> result = core::PlanSamples(in.request, call.stop);
  if (!result.ok()) return result.status();
  return PlanResponseToProto(*result);
}

}  // namespace riskbound::rpc
