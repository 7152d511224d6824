// The CLI's connection to riskbound-server: channel, per-call deadline, and
// the mapping from gRPC status to exit code and message.
#ifndef RISKBOUND_CLIENT_CLI_CLIENT_H_
#define RISKBOUND_CLIENT_CLI_CLIENT_H_

#include <memory>
#include <ostream>
#include <string>
#include <vector>

#include "absl/status/statusor.h"
#include "absl/time/time.h"
#include "client_cli/args.h"
#include "grpcpp/channel.h"
#include "grpcpp/client_context.h"
#include "riskbound/v1/riskbound.grpc.pb.h"

namespace riskbound::cli {

struct ClientOptions {
  std::string server = "127.0.0.1:50051";
  absl::Duration timeout = absl::Seconds(10);
};

// ConnectionOptions
// The --server and --timeout flags every networked command takes.
std::vector<OptionSpec> ConnectionOptions();

// ClientOptionsFromArgs
// Reads --server (default: $RISKBOUND_SERVER, else 127.0.0.1:50051) and
// --timeout (seconds, > 0). INVALID_ARGUMENT naming the flag on bad values.
absl::StatusOr<ClientOptions> ClientOptionsFromArgs(const ParsedArgs& args);

// RiskBoundClient
// One channel; every call carries the configured deadline. Thread-safe.
class RiskBoundClient {
 public:
  explicit RiskBoundClient(const ClientOptions& options);
  grpc::Status Certify(const v1::CertifyRequest& request, v1::CertifyResponse* response);

  // For every other RPC: a context carrying the deadline, and the stub.
  // Example: auto ctx = client.NewContext(); client.stub()->Gate(ctx.get(), req, &resp);
  std::unique_ptr<grpc::ClientContext> NewContext() const;
  v1::RiskBound::Stub* stub() { return stub_.get(); }
  grpc::Channel* channel() { return channel_.get(); }

  const ClientOptions& options() const { return options_; }

 private:
  // Constant after construction.
  const ClientOptions options_;
  std::shared_ptr<grpc::Channel> channel_;
  std::unique_ptr<v1::RiskBound::Stub> stub_;
};

// ExitCodeFor
// kExitOk, kExitInvalidInput (INVALID_ARGUMENT, OUT_OF_RANGE,
// FAILED_PRECONDITION), kExitUnreachable (UNAVAILABLE, DEADLINE_EXCEEDED),
// kExitServerLimit (RESOURCE_EXHAUSTED), or kExitInternal.
int ExitCodeFor(const grpc::Status& status);

// ReportRpcError
// Writes "riskbound: <what went wrong>" to `err`, with one line per field
// violation when the server sent them, and returns ExitCodeFor(status).
int ReportRpcError(const grpc::Status& status, const ClientOptions& options, std::ostream& err);

}  // namespace riskbound::cli

#endif  // RISKBOUND_CLIENT_CLI_CLIENT_H_
