// Conversion between riskbound.v1 PlanSamples messages (plan.proto) and the
// core planner (core::PlanSamples): a mechanical copy both ways. The core's
// request mirrors the wire's `plan` oneof, so the paths it reports are wire
// paths ("holdout.target_risk", "training.held_sample_count", "plan").
#ifndef RISKBOUND_SERVICE_RPC_PLAN_CONVERT_H_
#define RISKBOUND_SERVICE_RPC_PLAN_CONVERT_H_

#include "riskbound/v1/plan.pb.h"
#include "service/core/plan.h"
#include "service/rpc/refusals.h"

namespace riskbound::rpc {

// PlanRequestFromProto
// The core request: the oneof member that is set (neither when unset: the
// core names "plan"). A training capacity's model with layer_widths over its
// cap is refused as in ModelDescriptionFromProto. Thread-safe.
Converted<core::PlanSamplesRequest> PlanRequestFromProto(const v1::PlanSamplesRequest& in);

// PlanResponseToProto
// Copies a core plan, with the cautions and the engine version.
v1::PlanSamplesResponse PlanResponseToProto(const core::PlanSamplesResult& result);

}  // namespace riskbound::rpc

#endif  // RISKBOUND_SERVICE_RPC_PLAN_CONVERT_H_
