// Starting the riskbound gRPC server: the service, gRPC health checking
// (grpc.health.v1, SERVING once started) and server reflection.
#ifndef RISKBOUND_SERVICE_RPC_SERVER_H_
#define RISKBOUND_SERVICE_RPC_SERVER_H_

#include <memory>
#include <string>

#include "absl/status/statusor.h"
#include "absl/time/time.h"
#include "grpcpp/server.h"
#include "service/rpc/riskbound_service.h"

namespace riskbound::rpc {

struct ServerConfig {
  // host:port to listen on; port 0 picks a free port (read it back from
  // RunningServer::port()).
  std::string listen_address = "127.0.0.1:50051";
  // Threads that serve requests (gRPC sync server polling threads, max).
  int threads = 4;
};

// A started server. Destroying it shuts it down.
class RunningServer {
 public:
  RunningServer(std::unique_ptr<RiskBoundService> service,
                std::unique_ptr<grpc::Server> server, int port);
  ~RunningServer();
  RunningServer(const RunningServer&) = delete;
  RunningServer& operator=(const RunningServer&) = delete;

  // The port the server is bound to.
  int port() const { return port_; }
  grpc::Server* server() { return server_.get(); }

  // Shutdown
  // Marks health NOT_SERVING, stops accepting calls and waits up to `grace`
  // for calls in flight before cancelling them. Idempotent. Thread-safe.
  void Shutdown(absl::Duration grace);

  // Wait
  // Blocks until the server has shut down.
  void Wait();

 private:
  // Constant after construction.
  std::unique_ptr<RiskBoundService> service_;
  std::unique_ptr<grpc::Server> server_;
  const int port_;
};

// StartServer
// Builds and starts the server. Returns UNAVAILABLE when the address cannot be
// bound, INVALID_ARGUMENT for threads < 1.
absl::StatusOr<std::unique_ptr<RunningServer>> StartServer(const ServerConfig& config);

}  // namespace riskbound::rpc

#endif  // RISKBOUND_SERVICE_RPC_SERVER_H_
