#include "client_cli/client.h"

#include <chrono>
#include <cstdlib>
#include <fstream>
#include <sstream>

#include "absl/strings/ascii.h"
#include "absl/strings/match.h"
#include "absl/strings/numbers.h"
#include "absl/strings/str_cat.h"
#include "absl/strings/str_split.h"
#include "absl/strings/strip.h"
#include "client_cli/exit_codes.h"
#include "grpcpp/create_channel.h"
#include "grpcpp/security/credentials.h"
#include "google/rpc/error_details.pb.h"
#include "google/rpc/status.pb.h"

namespace riskbound::cli {

std::vector<OptionSpec> ConnectionOptions() {
  return {
      {"server", "HOST:PORT", "riskbound-server address, or a gRPC target of several replicas "
                              "(dns:///NAME:PORT, ipv4:A:P,B:P; calls go round robin) (default "
                              "$RISKBOUND_SERVER or 127.0.0.1:50051)"},
      {"timeout", "SECONDS", "deadline of each call (default 10)"},
      {"plaintext", "",
       "connect without TLS (the default only for a loopback --server: 127.0.0.1, localhost, "
       "[::1])"},
      {"tls-ca-file", "PATH",
       "PEM CA certificates to verify the server with (TLS; default: the system's CAs)"},
      {"tls-cert-file", "PATH", "PEM client certificate chain for a mutual-TLS server"},
      {"tls-key-file", "PATH", "PEM private key of --tls-cert-file"},
      {"tls-server-name", "NAME",
       "the name the server's certificate must carry, when not the host of --server"},
      {"auth-token-file", "PATH",
       "file holding the bearer token to send (first non-comment line; default "
       "$RISKBOUND_AUTH_TOKEN)"},
  };
}

namespace {

// One HOST:PORT (or [IPV6]:PORT) of a target.
bool IsLoopbackHostPort(absl::string_view host) {
  if (absl::ConsumePrefix(&host, "[")) {
    host = host.substr(0, host.find(']'));
    return host == "::1";
  }
  host = host.substr(0, host.rfind(':'));
  if (absl::AsciiStrToLower(host) == "localhost") return true;
  const std::vector<absl::string_view> parts = absl::StrSplit(host, '.');
  int octet = 0;
  if (parts.size() != 4 || parts[0] != "127") return false;
  for (absl::string_view part : parts) {
    if (!absl::SimpleAtoi(part, &octet) || octet < 0 || octet > 255) return false;
  }
  return true;
}

}  // namespace

bool IsLoopbackAddress(const std::string& server) {
  absl::string_view target = server;
  if (absl::StartsWith(target, "unix:") || absl::StartsWith(target, "unix-abstract:")) return true;
  if (absl::ConsumePrefix(&target, "ipv4:") || absl::ConsumePrefix(&target, "ipv6:")) {
    // A list of addresses (several replicas): loopback when every one is.
    for (absl::string_view address : absl::StrSplit(target, ',')) {
      if (!IsLoopbackHostPort(address)) return false;
    }
    return true;
  }
  return IsLoopbackHostPort(target);
}

namespace {

absl::StatusOr<std::string> ReadFlagFile(const char* flag, const std::string& path) {
  std::ifstream in(path, std::ios::binary);
  std::stringstream buffer;
  if (in) buffer << in.rdbuf();
  if (!in || in.bad()) {
    return absl::InvalidArgumentError(absl::StrCat("--", flag, ": cannot read ", path));
  }
  return buffer.str();
}

// The first line of a token file that is not empty or a '#' comment,
// without surrounding whitespace (the server's token files read the same).
absl::StatusOr<std::string> TokenFrom(const std::string& path) {
  auto text = ReadFlagFile("auth-token-file", path);
  if (!text.ok()) return text.status();
  for (absl::string_view line : absl::StrSplit(*text, '\n')) {
    line = absl::StripAsciiWhitespace(line);
    if (!line.empty() && line[0] != '#') return std::string(line);
  }
  return absl::InvalidArgumentError(absl::StrCat("--auth-token-file: no token in ", path));
}

}  // namespace

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
  bool tls = false;
  for (const char* flag : {"tls-ca-file", "tls-cert-file", "tls-key-file", "tls-server-name"}) {
    if (auto value = args.Get(flag)) {
      if (value->empty()) return absl::InvalidArgumentError(absl::StrCat("--", flag, ": empty"));
      tls = true;
    }
  }
  out.plaintext = args.Has("plaintext");
  if (out.plaintext && tls) {
    return absl::InvalidArgumentError("--plaintext and --tls-* flags: choose one");
  }
  if (!out.plaintext && !tls) out.plaintext = IsLoopbackAddress(out.server);
  if (args.Has("tls-cert-file") != args.Has("tls-key-file")) {
    return absl::InvalidArgumentError(args.Has("tls-cert-file")
                                          ? "--tls-cert-file needs --tls-key-file"
                                          : "--tls-key-file needs --tls-cert-file");
  }
  for (auto [flag, pem] : {std::pair{"tls-ca-file", &out.tls_ca_pem},
                           std::pair{"tls-cert-file", &out.tls_cert_pem},
                           std::pair{"tls-key-file", &out.tls_key_pem}}) {
    if (auto path = args.Get(flag)) {
      auto text = ReadFlagFile(flag, *path);
      if (!text.ok()) return text.status();
      *pem = *std::move(text);
    }
  }
  out.tls_server_name = args.Get("tls-server-name").value_or("");
  if (auto path = args.Get("auth-token-file")) {
    auto token = TokenFrom(*path);
    if (!token.ok()) return token.status();
    out.auth_token = *std::move(token);
  } else if (const char* env = std::getenv("RISKBOUND_AUTH_TOKEN"); env != nullptr) {
    out.auth_token = std::string(absl::StripAsciiWhitespace(env));
  }
  if (!out.auth_token.empty() && out.plaintext && !IsLoopbackAddress(out.server)) {
    return absl::InvalidArgumentError(absl::StrCat(
        "a bearer token would travel unencrypted to ", out.server,
        " (--plaintext): connect with TLS (--tls-ca-file), or leave the token out"));
  }
  return out;
}

std::shared_ptr<grpc::Channel> MakeChannel(const ClientOptions& options, bool own_connection) {
  // Calls spread over every address the target resolves to (several
  // replicas behind dns:///name, or ipv4:a:p,b:p): gRPC's round_robin policy.
  grpc::ChannelArguments arguments;
  arguments.SetLoadBalancingPolicyName("round_robin");
  if (own_connection) arguments.SetInt(GRPC_ARG_USE_LOCAL_SUBCHANNEL_POOL, 1);
  if (options.plaintext) {
    return grpc::CreateCustomChannel(options.server, grpc::InsecureChannelCredentials(),
                                     arguments);
  }
  grpc::SslCredentialsOptions ssl;
  ssl.pem_root_certs = options.tls_ca_pem;
  ssl.pem_cert_chain = options.tls_cert_pem;
  ssl.pem_private_key = options.tls_key_pem;
  if (!options.tls_server_name.empty()) {
    arguments.SetSslTargetNameOverride(options.tls_server_name);
  }
  return grpc::CreateCustomChannel(options.server, grpc::SslCredentials(ssl), arguments);
}

void AddCallCredentials(const ClientOptions& options, grpc::ClientContext* context) {
  if (!options.auth_token.empty()) {
    context->AddMetadata("authorization", absl::StrCat("Bearer ", options.auth_token));
  }
}

RiskBoundClient::RiskBoundClient(const ClientOptions& options)
    : options_(options),
      channel_(MakeChannel(options)),
      stub_(v1::RiskBound::NewStub(channel_)) {}

std::unique_ptr<grpc::ClientContext> RiskBoundClient::NewContext() const {
  auto context = std::make_unique<grpc::ClientContext>();
  context->set_deadline(std::chrono::system_clock::now() +
                        absl::ToChronoMilliseconds(options_.timeout));
  AddCallCredentials(options_, context.get());
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
    case grpc::StatusCode::UNAUTHENTICATED:
    case grpc::StatusCode::PERMISSION_DENIED:
      return kExitUnauthenticated;
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
  if (code == kExitUnauthenticated) {
    err << "riskbound: the server at " << options.server << " refused the credentials: "
        << status.error_message()
        << (options.auth_token.empty()
                ? " (give a token with --auth-token-file or RISKBOUND_AUTH_TOKEN)"
                : "")
        << "\n";
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
