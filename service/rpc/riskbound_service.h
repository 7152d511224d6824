// The riskbound.v1.RiskBound service on gRPC's callback API.
//
// Every method is registered raw (request and response as bytes), so the
// service decodes the request itself and can answer INVALID_ARGUMENT for a
// body that is not a valid message. Each call is admitted to the CallPool or
// refused at once (RESOURCE_EXHAUSTED when full, UNAVAILABLE while
// draining), runs one of the handlers.h functions on a pool thread with a
// StopToken that fires when the client cancels, its deadline or the server's
// per-call limit passes, or the drain period ends; the answer is refused with
// RESOURCE_EXHAUSTED when it is larger than the response limit. With a
// TokenAuthenticator, a call without a valid bearer token is answered
// UNAUTHENTICATED before it is admitted (auth.h says why here).
#ifndef RISKBOUND_SERVICE_RPC_RISKBOUND_SERVICE_H_
#define RISKBOUND_SERVICE_RPC_RISKBOUND_SERVICE_H_

#include <cstdint>
#include <atomic>

#include "absl/base/thread_annotations.h"
#include "absl/status/statusor.h"
#include "absl/container/flat_hash_set.h"
#include "absl/synchronization/mutex.h"
#include "absl/time/time.h"
#include "riskbound/v1/riskbound.grpc.pb.h"
#include "service/core/stop.h"
#include "service/rpc/auth.h"
#include "service/rpc/call_pool.h"
#include "service/rpc/handlers.h"
#include "service/rpc/metrics.h"

namespace riskbound::rpc {

// The per-call limits the service enforces.
struct CallLimits {
  // Largest request accepted, in bytes after decompression (gRPC refuses a
  // larger one with RESOURCE_EXHAUSTED before the service sees it).
  std::int64_t max_request_bytes = 4 << 20;
  // Largest answer sent, in bytes; a larger one becomes RESOURCE_EXHAUSTED
  // saying so (4 MiB is what a default gRPC client accepts).
  std::int64_t max_response_bytes = 4 << 20;
  // Wall-clock budget of one call from admission, whatever the client's
  // deadline; past it the call stops with DEADLINE_EXCEEDED.
  absl::Duration max_call_time = absl::Seconds(10);
};

namespace internal {
using RawRiskBoundService = v1::RiskBound::WithRawCallbackMethod_Certify<
    v1::RiskBound::WithRawCallbackMethod_EstimateCapacity<
        v1::RiskBound::WithRawCallbackMethod_Gate<
            v1::RiskBound::WithRawCallbackMethod_SelectStructure<
                v1::RiskBound::WithRawCallbackMethod_PlanSamples<
                    v1::RiskBound::WithRawCallbackMethod_ListFamilies<
                        v1::RiskBound::WithRawCallbackMethod_ScoreRegistry<
                            v1::RiskBound::WithRawCallbackMethod_FitEffectiveVcDimension<
                                v1::RiskBound::Service>>>>>>>>;

// A call in flight that CancelAll can stop.
class Cancellable {
 public:
  virtual ~Cancellable() = default;
  // Fires the call's StopToken(s). Thread-safe.
  virtual void CancelCall() = 0;
};
class CallReactor;
class ScoreStream;
}  // namespace internal

// RiskBoundService
// Stateless apart from the set of calls in flight (for CancelAll).
// Thread-safe.
class RiskBoundService final : public internal::RawRiskBoundService {
 public:
  // REQUIRES: `pool`, `metrics` and `auth` (both of which may be null)
  // outlive the service. A null `auth`: calls need no token.
  RiskBoundService(CallPool* pool, CallLimits limits, Metrics* metrics = nullptr,
                   const TokenAuthenticator* auth = nullptr);

  grpc::ServerUnaryReactor* Certify(grpc::CallbackServerContext* context,
                                    const grpc::ByteBuffer* request,
                                    grpc::ByteBuffer* response) override;
  grpc::ServerUnaryReactor* EstimateCapacity(grpc::CallbackServerContext* context,
                                             const grpc::ByteBuffer* request,
                                             grpc::ByteBuffer* response) override;
  grpc::ServerUnaryReactor* Gate(grpc::CallbackServerContext* context,
                                 const grpc::ByteBuffer* request,
                                 grpc::ByteBuffer* response) override;
  grpc::ServerUnaryReactor* SelectStructure(grpc::CallbackServerContext* context,
                                            const grpc::ByteBuffer* request,
                                            grpc::ByteBuffer* response) override;
  grpc::ServerUnaryReactor* PlanSamples(grpc::CallbackServerContext* context,
                                        const grpc::ByteBuffer* request,
                                        grpc::ByteBuffer* response) override;
  grpc::ServerUnaryReactor* ListFamilies(grpc::CallbackServerContext* context,
                                         const grpc::ByteBuffer* request,
                                         grpc::ByteBuffer* response) override;
  grpc::ServerUnaryReactor* FitEffectiveVcDimension(grpc::CallbackServerContext* context,
                                                    const grpc::ByteBuffer* request,
                                                    grpc::ByteBuffer* response) override;
  // The registry stream (registry.proto): admitted to the CallPool once for
  // its whole life (one pending call), each record computed on a pool
  // thread in turn, one record in flight per stream, so the server buffers
  // at most one request and one answer per stream whatever the registry
  // size. Each record has the per-call time limit; the stream as a whole
  // only the client's deadline.
  grpc::ServerBidiReactor<grpc::ByteBuffer, grpc::ByteBuffer>* ScoreRegistry(
      grpc::CallbackServerContext* context) override;

  // StartDrain
  // New calls are refused with UNAVAILABLE from now on. Thread-safe.
  void StartDrain();

  // CancelAll
  // Fires the StopToken of every call in flight: each stops at its next check
  // and answers UNAVAILABLE (draining) or CANCELLED. Thread-safe.
  void CancelAll();

  // The number of calls started and not yet done. Thread-safe.
  int calls_in_flight() const;

 private:
  friend class internal::CallReactor;
  friend class internal::ScoreStream;
  template <class Request, class Response>
  grpc::ServerUnaryReactor* Dispatch(
      const char* method, grpc::CallbackServerContext* context, const grpc::ByteBuffer* request,
      grpc::ByteBuffer* response,
      absl::StatusOr<Response> (*handler)(const Request&, const CallInfo&));
  // True when no token is needed, or the call's `authorization` metadata
  // holds a valid bearer token (auth.h). Every method, unary or streaming,
  // asks before it admits the call.
  bool Authenticated(const grpc::CallbackServerContext& context) const;
  // AdmissionRefusal
  // OK for kAdmitted; else the status a refused call ends with
  // (RESOURCE_EXHAUSTED busy for kFull, UNAVAILABLE draining for kClosed),
  // the refusal counted in the metrics. Unary calls and streams share it.
  absl::Status AdmissionRefusal(CallPool::Admission admission) const;
  void Register(internal::Cancellable* call);
  void Unregister(internal::Cancellable* call);

  // Constant after construction.
  CallPool* const pool_;
  const CallLimits limits_;
  Metrics* const metrics_;
  const TokenAuthenticator* const auth_;

  std::atomic<bool> draining_{false};
  mutable absl::Mutex mu_;
  absl::flat_hash_set<internal::Cancellable*> calls_ ABSL_GUARDED_BY(mu_);
};

}  // namespace riskbound::rpc

#endif  // RISKBOUND_SERVICE_RPC_RISKBOUND_SERVICE_H_
