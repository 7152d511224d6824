// RiskBound.PlanSamples: convert -> core::PlanHoldout / core::PlanTraining ->
// convert.
#include "absl/time/clock.h"
#include "service/core/plan.h"
#include "service/rpc/handler_util.h"
#include "service/rpc/plan_convert.h"
#include "service/rpc/riskbound_service.h"
#include "service/rpc/select_convert.h"

namespace riskbound::rpc {

grpc::Status RiskBoundService::PlanSamples(grpc::ServerContext* /*context*/,
                                           const v1::PlanSamplesRequest* request,
                                           v1::PlanSamplesResponse* response) {
  const absl::Time start = absl::Now();
  absl::StatusOr<PlanCall> call = PlanRequestFromProto(*request);
  if (!call.ok()) return FinishCall("PlanSamples", start, call.status());
  if (call->holdout.has_value()) {
    absl::StatusOr<core::HoldoutPlan> plan = core::PlanHoldout(*call->holdout);
    if (!plan.ok()) {
      return FinishCall("PlanSamples", start,
                        MergeViolations({}, plan.status(), [](const std::string& p) {
                          return PlanPathToWire("holdout", p);
                        }));
    }
    *response = HoldoutPlanToProto(*plan);
    return FinishCall("PlanSamples", start, absl::OkStatus());
  }
  absl::StatusOr<core::TrainingPlan> plan = core::PlanTraining(*call->training);
  if (!plan.ok()) {
    return FinishCall("PlanSamples", start,
                      MergeViolations({}, plan.status(), [](const std::string& p) {
                        return PlanPathToWire("training", p);
                      }));
  }
  *response = TrainingPlanToProto(*call->training, *plan);
  return FinishCall("PlanSamples", start, absl::OkStatus());
}

}  // namespace riskbound::rpc
