// Conversion between effective_vc.proto and core::EffectiveVcRequest /
// core::EffectiveVcFit (effective_vc.h): a mechanical copy both ways, the
// training through enums.h, the list caps through refusals.h.
#ifndef RISKBOUND_SERVICE_RPC_EFFECTIVE_VC_CONVERT_H_
#define RISKBOUND_SERVICE_RPC_EFFECTIVE_VC_CONVERT_H_

#include "riskbound/v1/effective_vc.pb.h"
#include "service/core/effective_vc.h"
#include "service/rpc/refusals.h"

namespace riskbound::rpc {

// FitEffectiveVcDimensionRequestFromProto
// Copies every field; design_points over core::kMaxDesignPoints, or a
// point's deviations over core::kMaxDeviationCount, is refused before any
// entry is copied. Thread-safe.
Converted<core::EffectiveVcRequest> FitEffectiveVcDimensionRequestFromProto(
    const v1::FitEffectiveVcDimensionRequest& in);

// FitEffectiveVcDimensionResponseToProto
// The response for a core fit, with the engine version.
v1::FitEffectiveVcDimensionResponse FitEffectiveVcDimensionResponseToProto(
    const core::EffectiveVcFit& fit);

}  // namespace riskbound::rpc

#endif  // RISKBOUND_SERVICE_RPC_EFFECTIVE_VC_CONVERT_H_
