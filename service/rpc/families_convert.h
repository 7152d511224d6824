// Conversion of the core's family registry (service/core/families.h) to the
// riskbound.v1 ListFamilies messages (families.proto).
#ifndef RISKBOUND_SERVICE_RPC_FAMILIES_CONVERT_H_
#define RISKBOUND_SERVICE_RPC_FAMILIES_CONVERT_H_

#include "absl/types/span.h"
#include "riskbound/v1/families.pb.h"
#include "service/core/families.h"

namespace riskbound::rpc {

// FamilyDescriptionToProto
// Copies one registry row: enum value (through enums.h), name, title,
// source, assumptions and the evidence it needs.
void FamilyDescriptionToProto(const core::FamilySpec& spec, v1::FamilyDescription* out);

// ListFamiliesResponseToProto
// One description per row, in registry order, and the engine version.
v1::ListFamiliesResponse ListFamiliesResponseToProto(absl::Span<const core::FamilySpec> families);

}  // namespace riskbound::rpc

#endif  // RISKBOUND_SERVICE_RPC_FAMILIES_CONVERT_H_
