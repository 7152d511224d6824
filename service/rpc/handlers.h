// The riskbound.v1.RiskBound methods as plain functions of their request:
// convert -> core -> convert. No gRPC types: the service
// (riskbound_service.h) decodes the request, runs one of these on a pool
// thread with the call's StopToken, and encodes the answer.
//
// Each returns the response, or an absl::Status whose code and message the
// service copies to the wire: INVALID_ARGUMENT naming every bad field
// (core::InvalidFields), CANCELLED or DEADLINE_EXCEEDED when `stop` fired
// before the answer was complete. Each is thread-safe and stateless; each is
// defined in its own file, <method>_handler.cc.
#ifndef RISKBOUND_SERVICE_RPC_HANDLERS_H_
#define RISKBOUND_SERVICE_RPC_HANDLERS_H_

#include "absl/status/statusor.h"
#include "riskbound/v1/capacity.pb.h"
#include "riskbound/v1/certify.pb.h"
#include "riskbound/v1/families.pb.h"
#include "riskbound/v1/gate.pb.h"
#include "riskbound/v1/plan.pb.h"
#include "riskbound/v1/select.pb.h"
#include "service/core/stop.h"

namespace riskbound::rpc {

absl::StatusOr<v1::CertifyResponse> HandleCertify(const v1::CertifyRequest& request,
                                                  const core::StopToken& stop);
absl::StatusOr<v1::EstimateCapacityResponse> HandleEstimateCapacity(
    const v1::EstimateCapacityRequest& request, const core::StopToken& stop);
absl::StatusOr<v1::GateResponse> HandleGate(const v1::GateRequest& request,
                                            const core::StopToken& stop);
absl::StatusOr<v1::SelectStructureResponse> HandleSelectStructure(
    const v1::SelectStructureRequest& request, const core::StopToken& stop);
absl::StatusOr<v1::PlanSamplesResponse> HandlePlanSamples(const v1::PlanSamplesRequest& request,
                                                          const core::StopToken& stop);
absl::StatusOr<v1::ListFamiliesResponse> HandleListFamilies(
    const v1::ListFamiliesRequest& request, const core::StopToken& stop);

}  // namespace riskbound::rpc

#endif  // RISKBOUND_SERVICE_RPC_HANDLERS_H_
