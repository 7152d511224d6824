// RiskBound.ListFamilies: the core's family registry -> convert. The request
// has no fields, so there is nothing to validate.
#include "service/core/families.h"
#include "service/rpc/families_convert.h"
#include "service/rpc/handlers.h"

namespace riskbound::rpc {

absl::StatusOr<v1::ListFamiliesResponse> HandleListFamilies(
    const v1::ListFamiliesRequest& /*request*/, const CallInfo& call) {
  if (call.stop.StopRequested()) return call.stop.Status();
  return ListFamiliesResponseToProto(core::Families());
}

}  // namespace riskbound::rpc
