// The riskbound.v1.RiskBound methods as plain functions of their request:
// convert -> core -> convert. No gRPC types: the service
// (riskbound_service.h) and the HTTP gateway (http_gateway.h) decode the
// request, run one of these on a pool thread with the call's CallInfo (its
// StopToken and request id), and encode the answer.
//
// Each returns the response, or an absl::Status whose code and message the
// service copies to the wire: INVALID_ARGUMENT naming every bad field
// (core::InvalidFields), CANCELLED or DEADLINE_EXCEEDED when `call.stop`
// fired before the answer was complete. Each is thread-safe and stateless;
// each is defined in its own file, <method>_handler.cc.
#ifndef RISKBOUND_SERVICE_RPC_HANDLERS_H_
#define RISKBOUND_SERVICE_RPC_HANDLERS_H_

#include "absl/status/statusor.h"
#include "absl/strings/string_view.h"
#include "riskbound/v1/capacity.pb.h"
#include "riskbound/v1/certify.pb.h"
#include "riskbound/v1/effective_vc.pb.h"
#include "riskbound/v1/families.pb.h"
#include "riskbound/v1/gate.pb.h"
#include "riskbound/v1/plan.pb.h"
#include "riskbound/v1/select.pb.h"
#include "service/core/stop.h"

namespace riskbound::rpc {

// What a handler knows of its call besides the request.
struct CallInfo {
  // Fires when the client cancels, its deadline or the server's per-call
  // limit passes, or the drain period ends.
  const core::StopToken& stop;
  // The call's request id (request_id.h): the caller's x-request-id or a
  // generated one. Gate copies it into its audit record.
  absl::string_view request_id;
};

absl::StatusOr<v1::CertifyResponse> HandleCertify(const v1::CertifyRequest& request,
                                                  const CallInfo& call);
absl::StatusOr<v1::EstimateCapacityResponse> HandleEstimateCapacity(
    const v1::EstimateCapacityRequest& request, const CallInfo& call);
absl::StatusOr<v1::FitEffectiveVcDimensionResponse> HandleFitEffectiveVcDimension(
    const v1::FitEffectiveVcDimensionRequest& request, const CallInfo& call);
absl::StatusOr<v1::GateResponse> HandleGate(const v1::GateRequest& request,
                                            const CallInfo& call);
absl::StatusOr<v1::SelectStructureResponse> HandleSelectStructure(
    const v1::SelectStructureRequest& request, const CallInfo& call);
absl::StatusOr<v1::PlanSamplesResponse> HandlePlanSamples(const v1::PlanSamplesRequest& request,
                                                          const CallInfo& call);
absl::StatusOr<v1::ListFamiliesResponse> HandleListFamilies(
    const v1::ListFamiliesRequest& request, const CallInfo& call);

}  // namespace riskbound::rpc

#endif  // RISKBOUND_SERVICE_RPC_HANDLERS_H_
