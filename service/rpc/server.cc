#include "service/rpc/server.h"

#include <chrono>
#include <utility>

#include "absl/strings/str_cat.h"
#include "grpcpp/ext/proto_server_reflection_plugin.h"
#include "grpcpp/health_check_service_interface.h"
#include "grpcpp/security/server_credentials.h"
#include "grpcpp/server_builder.h"
#include "grpcpp/support/time.h"

namespace riskbound::rpc {

RunningServer::RunningServer(std::unique_ptr<RiskBoundService> service,
                             std::unique_ptr<grpc::Server> server, int port)
    : service_(std::move(service)), server_(std::move(server)), port_(port) {}

RunningServer::~RunningServer() { Shutdown(absl::ZeroDuration()); }

void RunningServer::Shutdown(absl::Duration grace) {
  if (auto* health = server_->GetHealthCheckService()) health->Shutdown();
  server_->Shutdown(std::chrono::system_clock::now() + absl::ToChronoMilliseconds(grace));
}

void RunningServer::Wait() { server_->Wait(); }

absl::StatusOr<std::unique_ptr<RunningServer>> StartServer(const ServerConfig& config) {
  if (config.threads < 1) {
    return absl::InvalidArgumentError(
        absl::StrCat("threads: must be at least 1, got ", config.threads));
  }
  grpc::EnableDefaultHealthCheckService(true);
  grpc::reflection::InitProtoReflectionServerBuilderPlugin();
  auto service = std::make_unique<RiskBoundService>();
  grpc::ServerBuilder builder;
  int port = 0;
  // TLS, mTLS and token auth are planned; today the server listens in plaintext
  // and defaults to loopback.
  builder.AddListeningPort(config.listen_address, grpc::InsecureServerCredentials(), &port);
  builder.RegisterService(service.get());
  builder.SetSyncServerOption(grpc::ServerBuilder::SyncServerOption::MAX_POLLERS,
                              config.threads);
  std::unique_ptr<grpc::Server> server = builder.BuildAndStart();
  if (server == nullptr || port == 0) {
    return absl::UnavailableError(
        absl::StrCat("cannot listen on ", config.listen_address,
                     " (address in use, malformed, or not local)"));
  }
  server->GetHealthCheckService()->SetServingStatus(true);
  return std::make_unique<RunningServer>(std::move(service), std::move(server), port);
}

}  // namespace riskbound::rpc
