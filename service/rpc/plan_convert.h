// Conversion between riskbound.v1 PlanSamples messages (plan.proto) and the
// core planners (core::PlanHoldout, core::PlanTraining).
//
// Field paths: the core names the fields of one plan ("target_risk",
// "held_sample_count"); on the wire they sit under the request's oneof
// ("holdout.target_risk", "training.held_sample_count"), and every violation
// is re-rooted there.
#ifndef RISKBOUND_SERVICE_RPC_PLAN_CONVERT_H_
#define RISKBOUND_SERVICE_RPC_PLAN_CONVERT_H_

#include <optional>
#include <string>

#include "absl/status/statusor.h"
#include "riskbound/v1/plan.pb.h"
#include "service/core/plan.h"

namespace riskbound::rpc {

// One plan request: exactly one of the two is set.
struct PlanCall {
  std::optional<core::HoldoutPlanRequest> holdout;
  std::optional<core::TrainingPlanRequest> training;
};

// PlanPathToWire
// The wire path of a field path a core planner reports, for the oneof member
// `kind` ("holdout" or "training"): "held_sample_count" -> "<kind>.held_sample_count",
// any other "x" -> "<kind>.x".
std::string PlanPathToWire(const std::string& kind, const std::string& core_path);

// PlanRequestFromProto
// Returns the core request, or INVALID_ARGUMENT listing every bad field by its
// wire path: "plan" when neither kind is given, the shape checks of a training
// plan (family value, capacity oneof) together with the core's own checks.
// Checks the core alone makes (every hold-out field) are left to the planner
// call, whose status the handler re-roots with PlanPathToWire. Thread-safe.
absl::StatusOr<PlanCall> PlanRequestFromProto(const v1::PlanSamplesRequest& in);

// HoldoutPlanToProto
// Returns the response for a hold-out plan, with the cautions and the engine
// version.
v1::PlanSamplesResponse HoldoutPlanToProto(const core::HoldoutPlan& plan);

// TrainingPlanToProto
// Returns the response for a training plan: the plan, the comparison-only
// sample sizes from the literature, the notes (with those of a capacity taken
// from a model description), the cautions and the engine version.
// REQUIRES: `plan` came from core::PlanTraining(request).
v1::PlanSamplesResponse TrainingPlanToProto(const core::TrainingPlanRequest& request,
                                            const core::TrainingPlan& plan);

}  // namespace riskbound::rpc

#endif  // RISKBOUND_SERVICE_RPC_PLAN_CONVERT_H_
