// The HTTP port: Prometheus metrics, and the RiskBound methods as
// POST /v1/<Method> with the protobuf JSON mapping in and out, for pipeline
// steps that have curl but no gRPC client.
//
// The JSON methods run the same handlers (handlers.h) on the same CallPool,
// under the same limits (request size, per-call time budget, admission) as
// the gRPC methods. Errors are JSON in the shape of google.rpc.Status in the
// protobuf JSON mapping: {"code": 3, "message": "...", "details": [
// {"@type": "type.googleapis.com/google.rpc.BadRequest", "fieldViolations":
// [{"field": "...", "description": "..."}]}, {"@type":
// "type.googleapis.com/google.rpc.ErrorInfo", ...}]}, with the HTTP status
// mapped from the gRPC code in the usual way (400, 429, 503, 504, ...).
// Every answer carries the call's request id (request_id.h) in the
// X-Request-Id header, and each method call adds one log line (LogCall).
//
// The port shares the gRPC port's transport security (TLS, or mutual TLS
// requiring a client certificate from the client CA, from the same files)
// and its bearer tokens: with a TokenAuthenticator every path, /metrics
// included, needs "Authorization: Bearer <token>" (a Prometheus scrape job
// sends one from a file); without a valid one the answer is 401 with the
// same message as gRPC's UNAUTHENTICATED.
#ifndef RISKBOUND_SERVICE_RPC_HTTP_GATEWAY_H_
#define RISKBOUND_SERVICE_RPC_HTTP_GATEWAY_H_

#include <atomic>
#include <memory>
#include <string>
#include <thread>

#include "absl/status/status.h"
#include "service/rpc/auth.h"
#include "service/rpc/call_pool.h"
#include "service/rpc/metrics.h"
#include "service/rpc/riskbound_service.h"
#include "service/rpc/tls.h"

namespace httplib {
class Server;
}

namespace riskbound::rpc {

// HttpStatusFor
// The HTTP status for a gRPC/absl status code (the mapping of
// google.rpc.Code's documentation, common practice): OK 200,
// INVALID_ARGUMENT / FAILED_PRECONDITION / OUT_OF_RANGE 400, UNAUTHENTICATED
// 401, PERMISSION_DENIED 403, NOT_FOUND 404, ALREADY_EXISTS / ABORTED 409,
// RESOURCE_EXHAUSTED 429, CANCELLED 499, UNIMPLEMENTED 501, UNAVAILABLE 503,
// DEADLINE_EXCEEDED 504, others 500.
int HttpStatusFor(absl::StatusCode code);

// ErrorJson
// The JSON error body for a non-OK status: the google.rpc.Status that a gRPC
// client gets in the grpc-status-details-bin trailer (status.h), in the
// protobuf JSON mapping; with field violations its details are a
// google.rpc.BadRequest and a google.rpc.ErrorInfo, else it is code and
// message only.
std::string ErrorJson(const absl::Status& status);

class HttpGateway {
 public:
  // REQUIRES: pool, metrics and auth (null: no token needed) outlive the
  // gateway. With tls.enabled(), the port speaks HTTPS only (TLS 1.2 or
  // later), and with tls.mutual() it requires a client certificate that
  // chains to the client CA. The files must have passed LoadTls.
  HttpGateway(CallPool* pool, CallLimits limits, Metrics* metrics,
              const TokenAuthenticator* auth = nullptr, TlsFiles tls = {});
  ~HttpGateway();
  HttpGateway(const HttpGateway&) = delete;
  HttpGateway& operator=(const HttpGateway&) = delete;

  // Start
  // Binds HOST:PORT (port 0 picks one; read it back from port()) and serves
  // on a thread of its own. UNAVAILABLE when the address cannot be bound,
  // INVALID_ARGUMENT when the TLS files cannot be loaded.
  absl::Status Start(const std::string& host, int port);

  int port() const { return port_; }

  // Stop
  // Stops accepting and waits for the requests being answered. Idempotent.
  void Stop();

  // StartDrain
  // JSON calls are answered UNAVAILABLE from now on; /metrics stays up until
  // Stop. Thread-safe.
  void StartDrain() { draining_.store(true); }

 private:
  void Route();

  // Constant after construction.
  CallPool* const pool_;
  const CallLimits limits_;
  Metrics* const metrics_;
  const TokenAuthenticator* const auth_;
  const TlsFiles tls_;

  std::unique_ptr<httplib::Server> server_;
  std::thread thread_;
  int port_ = 0;
  std::atomic<bool> draining_{false};
};

}  // namespace riskbound::rpc

#endif  // RISKBOUND_SERVICE_RPC_HTTP_GATEWAY_H_
