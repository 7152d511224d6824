// RiskBound.FitEffectiveVcDimension: convert -> core::FitEffectiveVcDimension
// -> convert. A heuristic: nothing else in the service reads its answer.
#include "service/core/effective_vc.h"
#include "service/rpc/effective_vc_convert.h"
#include "service/rpc/handlers.h"

namespace riskbound::rpc {

absl::StatusOr<v1::FitEffectiveVcDimensionResponse> HandleFitEffectiveVcDimension(
    const v1::FitEffectiveVcDimensionRequest& request, const CallInfo& call) {
  const Converted<core::EffectiveVcRequest> in = FitEffectiveVcDimensionRequestFromProto(request);
  if (!in.refusals.empty()) return WithRefusals(in.refusals, absl::OkStatus());
  absl::StatusOr<core::EffectiveVcFit> fit = core::FitEffectiveVcDimension(in.request, call.stop);
  if (!fit.ok()) return fit.status();
  return FitEffectiveVcDimensionResponseToProto(*fit);
}

}  // namespace riskbound::rpc
