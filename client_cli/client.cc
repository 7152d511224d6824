#include "client_cli/client.h"

#include <chrono>
#include <cstdlib>

#include "absl/strings/str_cat.h"
#include "client_cli/exit_codes.h"
#include "grpcpp/create_channel.h"
#include "grpcpp/security/credentials.h"
#include "google/rpc/error_details.pb.h"
#include "google/rpc/status.pb.h"

namespace riskbound::cli {

std::vector<OptionSpec> ConnectionOptions() {
  return {
      {"server", "HOST:PORT", "riskbound-server address (default $RISKBOUND_SERVER or 127.0.0.1:50051)"},
      {"timeout", "SECONDS", "deadline of each call (default 10)"},
  };
}

absl::StatusOr<ClientOptions> ClientOptionsFromArgs(const ParsedArgs& args) {
  ClientOptions out;
  if (const char* env = std::getenv("RISKBOUND_SERVER"); env != nullptr && *env != '\0') {
    out.server = env;
  }
  if (auto server = args.Get("server")) {
    if (server->empty()) return absl::InvalidArgumentError("--server: empty address");
    out.server = *server;
  }
  auto timeout = args.GetDouble("timeout");
  if (!timeout.ok()) return timeout.status();
  if (timeout->has_value()) {
    if (**timeout <= 0) return absl::InvalidArgumentError("--timeout: must be > 0 seconds");
    out.timeout = absl::Seconds(**timeout);
  }
  return out;
}

namespace {

// Calls spread over every address the target resolves to (several
// replicas behind dns:///name, or ipv4:a:p,b:p): gRPC's round_robin policy.
grpc::ChannelArguments RoundRobinArguments() {
  grpc::ChannelArguments args;
  args.SetLoadBalancingPolicyName("round_robin");
  return args;
}

}  // namespace

RiskBoundClient::RiskBoundClient(const ClientOptions& options)
    : options_(options),
      // Plaintext today (TLS is planned); the default address is loopback.
      channel_(grpc::CreateCustomChannel(options.server, grpc::InsecureChannelCredentials(),
                                         RoundRobinArguments())),
      stub_(v1::RiskBound::NewStub(channel_)) {}

std::unique_ptr<grpc::ClientContext> RiskBoundClient::NewContext() const {
  auto context = std::make_unique<grpc::ClientContext>();
  context->set_deadline(std::chrono::system_clock::now() +
                        absl::ToChronoMilliseconds(options_.timeout));
  return context;
}

grpc::Status RiskBoundClient::Certify(const v1::CertifyRequest& request,
                                      v1::CertifyResponse* response) {
  return stub_->Certify(NewContext().get(), request, response);
}

int ExitCodeFor(const grpc::Status& status) {
  switch (status.error_code()) {
    case grpc::StatusCode::OK:
      return kExitOk;
    case grpc::StatusCode::INVALID_ARGUMENT:
    case grpc::StatusCode::OUT_OF_RANGE:
    case grpc::StatusCode::FAILED_PRECONDITION:
      return kExitInvalidInput;
    case grpc::StatusCode::UNAVAILABLE:
    case grpc::StatusCode::DEADLINE_EXCEEDED:
      return kExitUnreachable;
    case grpc::StatusCode::RESOURCE_EXHAUSTED:
      return kExitServerLimit;
    default:
      return kExitInternal;
  }
}

int ReportRpcError(const grpc::Status& status, const ClientOptions& options, std::ostream& err) {
  const int code = ExitCodeFor(status);
  if (code == kExitUnreachable) {
    err << "riskbound: cannot reach the server at " << options.server << " ("
        << (status.error_code() == grpc::StatusCode::DEADLINE_EXCEEDED ? "no answer within the timeout"
                                                                        : "unavailable")
        << "): " << status.error_message() << "\n";
    return code;
  }
  // The standard error details: a google.rpc.Status whose details hold a
  // google.rpc.BadRequest (found by its type URL).
  google::rpc::Status detail;
  google::rpc::BadRequest violations;
  if (!status.error_details().empty() && detail.ParseFromString(status.error_details())) {
    for (const auto& any : detail.details()) {
      if (any.Is<google::rpc::BadRequest>() && any.UnpackTo(&violations)) break;
    }
  }
  if (violations.field_violations_size() > 0) {
    err << "riskbound: the server refused the request:\n";
    for (const auto& v : violations.field_violations()) {
      err << "  " << v.field() << ": " << v.description() << "\n";
    }
  } else if (code == kExitServerLimit) {
    err << "riskbound: the server at " << options.server
        << " refused the call for its limits: " << status.error_message() << "\n";
  } else {
    err << "riskbound: the server answered " << status.error_code() << ": "
        << status.error_message() << "\n";
  }
  return code;
}

}  // namespace riskbound::cli
