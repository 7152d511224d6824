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
  // Transport: plaintext, or TLS verifying the server against tls_ca_pem
  // (empty: the system's trusted CAs), presenting tls_cert_pem/tls_key_pem
  // to a mutual-TLS server when given.
  bool plaintext = false;
  std::string tls_ca_pem;
  std::string tls_cert_pem;
  std::string tls_key_pem;
  // The name the server's certificate must carry, when not the host of
  // `server` (--tls-server-name).
  std::string tls_server_name;
  // The bearer token sent as "authorization: Bearer <token>"; empty: none.
  std::string auth_token;
};

// ConnectionOptions
// The connection flags every networked command takes: --server, --timeout,
// --plaintext, --tls-ca-file, --tls-cert-file, --tls-key-file,
// --tls-server-name, --auth-token-file.
std::vector<OptionSpec> ConnectionOptions();

// IsLoopbackAddress
// True for a HOST:PORT whose host is localhost, 127.0.0.0/8 or [::1], an
// ipv4:/ipv6: target whose every address is one, or a unix: socket.
bool IsLoopbackAddress(const std::string& server);

// ClientOptionsFromArgs
// Reads --server (default: $RISKBOUND_SERVER, else 127.0.0.1:50051),
// --timeout (seconds, > 0), the transport and the token. The transport is
// TLS when a --tls-* flag is given, plaintext with --plaintext, and
// otherwise plaintext to a loopback address and TLS (system CAs) to any
// other. The token is the first token line of --auth-token-file, else
// $RISKBOUND_AUTH_TOKEN. The files are read here. INVALID_ARGUMENT naming the
// flag on bad values, unreadable files, --plaintext with a --tls-* flag, a
// certificate without its key, or a token to be sent in plaintext to a
// non-loopback address.
absl::StatusOr<ClientOptions> ClientOptionsFromArgs(const ParsedArgs& args);

// MakeChannel
// The channel `options` describe (plaintext or TLS). Every command,
// `health` included, connects through it. With `own_connection`, the
// channel never shares its connections with another channel of the process
// (gRPC otherwise reuses one connection for channels with equal settings).
std::shared_ptr<grpc::Channel> MakeChannel(const ClientOptions& options,
                                           bool own_connection = false);

// AddCallCredentials
// Adds the bearer token (if any) to a call's metadata.
void AddCallCredentials(const ClientOptions& options, grpc::ClientContext* context);

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
// kExitServerLimit (RESOURCE_EXHAUSTED), kExitUnauthenticated
// (UNAUTHENTICATED, PERMISSION_DENIED), or kExitInternal.
int ExitCodeFor(const grpc::Status& status);

// ReportRpcError
// Writes "riskbound: <what went wrong>" to `err`, with one line per field
// violation when the server sent them, and returns ExitCodeFor(status).
int ReportRpcError(const grpc::Status& status, const ClientOptions& options, std::ostream& err);

}  // namespace riskbound::cli

#endif  // RISKBOUND_CLIENT_CLI_CLIENT_H_
