// Starting and draining the riskbound gRPC server: the service, gRPC health
// checking (grpc.health.v1, for "" and "riskbound.v1.RiskBound") and server
// reflection.
#ifndef RISKBOUND_SERVICE_RPC_SERVER_H_
#define RISKBOUND_SERVICE_RPC_SERVER_H_

#include <memory>
#include <optional>
#include <string>
#include <vector>

#include "absl/status/statusor.h"
#include "absl/synchronization/mutex.h"
#include "absl/time/time.h"
#include "grpcpp/server.h"
#include "service/rpc/auth.h"
#include "service/rpc/call_pool.h"
#include "service/rpc/http_gateway.h"
#include "service/rpc/metrics.h"
#include "service/rpc/riskbound_service.h"
#include "service/rpc/tls.h"

namespace riskbound::rpc {

// The service name the health service reports besides "".
inline constexpr char kHealthServiceName[] = "riskbound.v1.RiskBound";

struct ServerConfig {
  // host:port to listen on; port 0 picks a free port (read it back from
  // RunningServer::port()). The port must not be in use by another process.
  std::string listen_address = "127.0.0.1:50051";
  // Threads that compute answers: at most this many calls compute at once.
  int threads = 4;
  // Calls admitted at once (computing plus waiting for a thread); a call
  // beyond is refused with RESOURCE_EXHAUSTED. REQUIRES: >= threads.
  int max_pending_calls = 64;
  // Per-call limits (request and response sizes, time budget).
  CallLimits limits;
  // HOST:PORT of the HTTP port (Prometheus metrics at GET /metrics, the
  // methods as POST /v1/<Method> in JSON); empty: no HTTP port. Port 0 picks
  // a free port (RunningServer::http_port()).
  std::string http_listen_address;
  // Transport security of both ports: TLS (mutual TLS with a client CA) from
  // these files, or plaintext, which must be asked for: a config with
  // neither (or both) is INVALID_ARGUMENT.
  TlsFiles tls;
  bool plaintext = false;
  // A file of bearer tokens (auth.h); empty: calls need no token. The
  // health service stays open either way.
  std::string auth_token_file;
};

// How a drain ended.
enum class DrainOutcome {
  // Every call in flight finished within the drain period.
  kClean,
  // The period ran out; the calls still in flight were cancelled and have
  // finished since.
  kCancelled,
  // The period ran out and some handler did not finish within a second of
  // being cancelled; it was abandoned (the caller should exit the process).
  kAbandoned,
};

// A started server. Destroying it drains with no grace.
class RunningServer {
 public:
  RunningServer(std::unique_ptr<CallPool> pool, std::unique_ptr<Metrics> metrics,
                std::unique_ptr<TokenAuthenticator> auth,
                std::unique_ptr<RiskBoundService> service, std::unique_ptr<grpc::Server> server,
                std::unique_ptr<HttpGateway> http, int port, std::vector<std::string> warnings);
  ~RunningServer();
  RunningServer(const RunningServer&) = delete;
  RunningServer& operator=(const RunningServer&) = delete;

  // The port the server is bound to.
  int port() const { return port_; }
  // The HTTP port, or 0 when there is none.
  int http_port() const { return http_ == nullptr ? 0 : http_->port(); }
  Metrics* metrics() { return metrics_.get(); }
  grpc::Server* server() { return server_.get(); }
  RiskBoundService* service() { return service_.get(); }
  // The bearer tokens in force, or null when calls need none.
  TokenAuthenticator* auth() { return auth_.get(); }
  // What the operator should know at start that did not stop the server
  // (a certificate past its end date), one sentence each.
  const std::vector<std::string>& warnings() const { return warnings_; }

  // Drain
  // Marks both health names NOT_SERVING, refuses new calls (UNAVAILABLE),
  // lets the calls in flight run for up to `grace`, then cancels them (each
  // observes its StopToken); then stops gRPC (listener, connections) and
  // waits at most one more second in all. Returns how it ended.
  // The first call does the work; later calls return its outcome at once.
  // Thread-safe.
  DrainOutcome Drain(absl::Duration grace);

 private:
  // Constant after construction.
  std::unique_ptr<CallPool> pool_;
  std::unique_ptr<Metrics> metrics_;
  std::unique_ptr<TokenAuthenticator> auth_;
  std::unique_ptr<RiskBoundService> service_;
  std::unique_ptr<grpc::Server> server_;
  std::unique_ptr<HttpGateway> http_;
  const int port_;
  const std::vector<std::string> warnings_;

  absl::Mutex mu_;
  std::optional<DrainOutcome> outcome_ ABSL_GUARDED_BY(mu_);
};

// StartServer
// Builds and starts the server. Returns UNAVAILABLE when the address cannot be
// bound (malformed, not local, or in use: the port is never shared with
// another process), the same for the HTTP address, INVALID_ARGUMENT for a bad
// config value (neither TLS nor plaintext, TLS files that do not load), the
// token file's error when it cannot be read or holds no valid token.
absl::StatusOr<std::unique_ptr<RunningServer>> StartServer(const ServerConfig& config);

}  // namespace riskbound::rpc

#endif  // RISKBOUND_SERVICE_RPC_SERVER_H_
