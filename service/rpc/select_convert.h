// Conversion between riskbound.v1 SelectStructure messages (select.proto) and
// core::SelectRequest / core::SelectResult: a mechanical copy both ways. The
// core's request mirrors the wire (structure, delta_spread, ...), so the
// paths it reports are wire paths; it holds the defaults (unset
// delta_spread and fragility_tolerance) and every check.
#ifndef RISKBOUND_SERVICE_RPC_SELECT_CONVERT_H_
#define RISKBOUND_SERVICE_RPC_SELECT_CONVERT_H_

#include "riskbound/v1/select.pb.h"
#include "service/core/select.h"
#include "service/rpc/refusals.h"

namespace riskbound::rpc {

// SelectRequestFromProto
// The core request. First of all the sizes (core/limits.h): more than
// kMaxStructureCandidates candidates or kMaxStructureWeights weights is
// refused before any candidate is copied (the weights cannot be judged
// without the candidates); an id longer than kMaxIdBytes is refused at
// "structure[i].id" and copied cut to the cap; a model's layer_widths over
// its cap as in ModelDescriptionFromProto. Thread-safe.
Converted<core::SelectRequest> SelectRequestFromProto(const v1::SelectStructureRequest& in);

// SelectResponseToProto
// Copies a core result, with the cautions and the engine version.
v1::SelectStructureResponse SelectResponseToProto(const core::SelectResult& result);

}  // namespace riskbound::rpc

#endif  // RISKBOUND_SERVICE_RPC_SELECT_CONVERT_H_
