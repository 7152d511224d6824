#include "service/rpc/server.h"

#include <chrono>
#include <thread>
#include <utility>

#include "absl/strings/numbers.h"
#include "absl/strings/str_cat.h"
#include "absl/synchronization/notification.h"
#include "absl/time/clock.h"
#include "grpcpp/ext/proto_server_reflection_plugin.h"
#include "grpcpp/health_check_service_interface.h"
#include "grpcpp/security/server_credentials.h"
#include "grpcpp/server_builder.h"

namespace riskbound::rpc {
namespace {

// How long grpc::Server::Shutdown waits, once the calls in flight are done or
// cancelled, for the last answers to be sent before it drops the
// connections. Below the one second Drain waits for it.
constexpr std::chrono::milliseconds kShutdownGrace(500);

}  // namespace

RunningServer::RunningServer(std::unique_ptr<CallPool> pool, std::unique_ptr<Metrics> metrics,
                             std::unique_ptr<TokenAuthenticator> auth,
                             std::unique_ptr<RiskBoundService> service,
                             std::unique_ptr<grpc::Server> server,
                             std::unique_ptr<HttpGateway> http, int port,
                             std::vector<std::string> warnings)
    : pool_(std::move(pool)),
      metrics_(std::move(metrics)),
      auth_(std::move(auth)),
      service_(std::move(service)),
      server_(std::move(server)),
      http_(std::move(http)),
      port_(port),
      warnings_(std::move(warnings)) {}

RunningServer::~RunningServer() {
  if (Drain(absl::ZeroDuration()) == DrainOutcome::kAbandoned) {
    // A handler ignored its cancellation: joining the pool would hang.
    (void)pool_.release();
    (void)metrics_.release();
    (void)auth_.release();
    (void)service_.release();
    (void)server_.release();
    (void)http_.release();
  }
}

DrainOutcome RunningServer::Drain(absl::Duration grace) {
  absl::MutexLock lock(&mu_);
  if (outcome_.has_value()) return *outcome_;
  if (auto* health = server_->GetHealthCheckService()) health->Shutdown();
  service_->StartDrain();
  if (http_ != nullptr) http_->StartDrain();
  pool_->StopAdmitting();
  // The calls in flight run for up to `grace`; meanwhile the service answers
  // every new call UNAVAILABLE itself (it is draining), so that a client
  // racing the drain learns to retry elsewhere.
  const bool clean = pool_->WaitIdle(grace);
  if (!clean) service_->CancelAll();
  // Only then grpc::Server::Shutdown: it closes the listener, sends GOAWAY,
  // lets the answers just finished reach their clients, and at its deadline
  // cancels what gRPC still holds and drops the connections. Its deadline is
  // short, not `grace`: an idle client connection holds Shutdown until its
  // deadline, which used to outlast the one second waited below and turn a
  // clean drain into an abandoned one (exit 3) whenever a client stayed
  // connected.
  auto done = std::make_shared<absl::Notification>();
  grpc::Server* server = server_.get();
  const auto deadline = std::chrono::system_clock::now() + kShutdownGrace;
  std::thread shutdown([server, deadline, done] {
    server->Shutdown(deadline);
    done->Notify();
  });
  const absl::Time give_up = absl::Now() + absl::Seconds(1);
  if (!done->WaitForNotificationWithTimeout(absl::Seconds(1)) ||
      !pool_->WaitIdle(give_up - absl::Now())) {
    shutdown.detach();
    outcome_ = DrainOutcome::kAbandoned;
    return *outcome_;
  }
  shutdown.join();
  server_->Wait();
  if (http_ != nullptr) http_->Stop();
  outcome_ = clean ? DrainOutcome::kClean : DrainOutcome::kCancelled;
  return *outcome_;
}

absl::StatusOr<std::unique_ptr<RunningServer>> StartServer(const ServerConfig& config) {
  if (config.threads < 1) {
    return absl::InvalidArgumentError(
        absl::StrCat("threads: must be at least 1, got ", config.threads));
  }
  if (config.max_pending_calls < config.threads) {
    return absl::InvalidArgumentError(
        absl::StrCat("max_pending_calls: must be at least threads (", config.threads, "), got ",
                     config.max_pending_calls));
  }
  if (config.plaintext == config.tls.enabled()) {
    return absl::InvalidArgumentError(
        config.plaintext ? "plaintext and tls: choose one"
                         : "no transport security chosen: give tls files, or plaintext");
  }
  std::optional<TlsMaterial> tls;
  if (config.tls.enabled()) {
    auto loaded = LoadTls(config.tls);
    if (!loaded.ok()) return loaded.status();
    tls = *std::move(loaded);
  }
  std::unique_ptr<TokenAuthenticator> auth;
  if (!config.auth_token_file.empty()) {
    auto loaded = TokenAuthenticator::Load(config.auth_token_file);
    if (!loaded.ok()) return loaded.status();
    auth = *std::move(loaded);
  }
  grpc::EnableDefaultHealthCheckService(true);
  grpc::reflection::InitProtoReflectionServerBuilderPlugin();
  auto pool = std::make_unique<CallPool>(config.threads, config.max_pending_calls);
  CallPool* pool_ptr = pool.get();
  auto metrics = std::make_unique<Metrics>(RISKBOUND_ENGINE_VERSION, RISKBOUND_SOURCE_COMMIT,
                                           [pool_ptr] { return pool_ptr->pending(); });
  metrics->SetLimit("threads", config.threads);
  metrics->SetLimit("max_pending_calls", config.max_pending_calls);
  metrics->SetLimit("max_call_seconds", absl::ToDoubleSeconds(config.limits.max_call_time));
  metrics->SetLimit("max_request_bytes", static_cast<double>(config.limits.max_request_bytes));
  metrics->SetLimit("max_response_bytes", static_cast<double>(config.limits.max_response_bytes));
  auto service =
      std::make_unique<RiskBoundService>(pool.get(), config.limits, metrics.get(), auth.get());
  std::unique_ptr<HttpGateway> http;
  if (!config.http_listen_address.empty()) {
    const auto colon = config.http_listen_address.rfind(':');
    int http_port = -1;
    std::string host;
    if (colon != std::string::npos && absl::SimpleAtoi(config.http_listen_address.substr(colon + 1), &http_port) &&
        http_port >= 0 && http_port <= 65535) {
      host = config.http_listen_address.substr(0, colon);
      if (host.size() >= 2 && host.front() == '[' && host.back() == ']') host = host.substr(1, host.size() - 2);
    }
    if (host.empty()) {
      return absl::InvalidArgumentError(absl::StrCat("http_listen_address: must be HOST:PORT, got \"",
                                                     config.http_listen_address, "\""));
    }
    http = std::make_unique<HttpGateway>(pool.get(), config.limits, metrics.get(), auth.get(),
                                         config.tls);
    if (absl::Status s = http->Start(host, http_port); !s.ok()) return s;
  }
  grpc::ServerBuilder builder;
  int port = 0;
  std::shared_ptr<grpc::ServerCredentials> credentials = grpc::InsecureServerCredentials();
  if (tls.has_value()) {
    grpc::SslServerCredentialsOptions options(
        config.tls.mutual() ? GRPC_SSL_REQUEST_AND_REQUIRE_CLIENT_CERTIFICATE_AND_VERIFY
                            : GRPC_SSL_DONT_REQUEST_CLIENT_CERTIFICATE);
    options.pem_root_certs = tls->client_ca_pem;
    options.pem_key_cert_pairs.push_back({tls->key_pem, tls->cert_chain_pem});
    credentials = grpc::SslServerCredentials(options);
  }
  builder.AddListeningPort(config.listen_address, credentials, &port);
  // Never share the port with another process (a stale server would answer
  // part of the traffic).
  builder.AddChannelArgument(GRPC_ARG_ALLOW_REUSEPORT, 0);
  builder.SetMaxReceiveMessageSize(static_cast<int>(config.limits.max_request_bytes));
  builder.SetMaxSendMessageSize(static_cast<int>(config.limits.max_response_bytes) + 1024);
  builder.RegisterService(service.get());
  // Only reflection is served by gRPC's synchronous threads; keep them few.
  builder.SetSyncServerOption(grpc::ServerBuilder::SyncServerOption::MIN_POLLERS, 1);
  builder.SetSyncServerOption(grpc::ServerBuilder::SyncServerOption::MAX_POLLERS, 2);
  std::unique_ptr<grpc::Server> server = builder.BuildAndStart();
  if (server == nullptr || port == 0) {
    return absl::UnavailableError(
        absl::StrCat("cannot listen on ", config.listen_address,
                     " (address in use, malformed, or not local)"));
  }
  grpc::HealthCheckServiceInterface* health = server->GetHealthCheckService();
  health->SetServingStatus(true);
  health->SetServingStatus(kHealthServiceName, true);
  return std::make_unique<RunningServer>(
      std::move(pool), std::move(metrics), std::move(auth), std::move(service), std::move(server),
      std::move(http), port, tls.has_value() ? tls->warnings : std::vector<std::string>{});
}

}  // namespace riskbound::rpc
