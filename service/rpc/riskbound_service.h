// The riskbound.v1.RiskBound service: thin handlers that convert, call the
// core, convert back, and log one line per request at debug level (FinishCall).
// Each handler is defined in its own file, <method>_handler.cc.
#ifndef RISKBOUND_SERVICE_RPC_RISKBOUND_SERVICE_H_
#define RISKBOUND_SERVICE_RPC_RISKBOUND_SERVICE_H_

#include "riskbound/v1/riskbound.grpc.pb.h"

namespace riskbound::rpc {

// RiskBoundService
// Stateless: every handler is a pure function of its request, so one instance
// serves any number of concurrent calls. Thread-safe.
class RiskBoundService final : public v1::RiskBound::Service {
 public:
  grpc::Status Certify(grpc::ServerContext* context, const v1::CertifyRequest* request,
                       v1::CertifyResponse* response) override;
  grpc::Status EstimateCapacity(grpc::ServerContext* context,
                                const v1::EstimateCapacityRequest* request,
                                v1::EstimateCapacityResponse* response) override;
  grpc::Status Gate(grpc::ServerContext* context, const v1::GateRequest* request,
                    v1::GateResponse* response) override;
  grpc::Status SelectStructure(grpc::ServerContext* context,
                               const v1::SelectStructureRequest* request,
                               v1::SelectStructureResponse* response) override;
  grpc::Status PlanSamples(grpc::ServerContext* context, const v1::PlanSamplesRequest* request,
                           v1::PlanSamplesResponse* response) override;
};

}  // namespace riskbound::rpc

#endif  // RISKBOUND_SERVICE_RPC_RISKBOUND_SERVICE_H_
