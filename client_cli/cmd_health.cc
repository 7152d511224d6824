// riskbound health: asks a server for its gRPC health status (grpc.health.v1,
// the open gRPC Health Checking Protocol) and exits 0 only for SERVING, so a
// container HEALTHCHECK, a script or a pipeline can use it as a probe.
//
// The generated code of grpc/health/v1/health.proto is not in Debian's dev
// packages, so the two one-field messages are written and read here on the
// protobuf wire format directly:
//   HealthCheckRequest  { string service = 1; }
//   HealthCheckResponse { ServingStatus status = 1; }
//   ServingStatus: UNKNOWN = 0, SERVING = 1, NOT_SERVING = 2, SERVICE_UNKNOWN = 3
// An unknown service name is answered with the status code NOT_FOUND.
#include <chrono>
#include <cstdint>
#include <future>
#include <optional>
#include <string>
#include <vector>

#include "absl/strings/str_cat.h"
#include "absl/time/time.h"
#include "client_cli/args.h"
#include "client_cli/client.h"
#include "client_cli/command_start.h"
#include "client_cli/commands.h"
#include "client_cli/exit_codes.h"
#include "google/protobuf/io/coded_stream.h"
#include "google/protobuf/io/zero_copy_stream_impl_lite.h"
#include "google/protobuf/wire_format_lite.h"
#include "grpcpp/create_channel.h"
#include "grpcpp/generic/generic_stub.h"
#include "grpcpp/security/credentials.h"
#include "grpcpp/support/byte_buffer.h"

namespace riskbound::cli {
namespace {

// The server answered, but not SERVING for the service asked about.
// (Listed with the other exit codes in `riskbound --help` and the README.)
constexpr int kExitNotServing = 6;

constexpr char kMethod[] = "/grpc.health.v1.Health/Check";
constexpr double kDefaultTimeoutSeconds = 2;

constexpr char kUsage[] =
    "riskbound health [--service NAME] [--server HOST:PORT] [--timeout SECONDS]\n"
    "                 [--output table|json] [--plaintext | --tls-ca-file PATH ...]";
constexpr char kSummary[] =
    "Asks riskbound-server for its health through the gRPC Health Checking Protocol\n"
    "(grpc.health.v1.Health/Check) and prints the status: SERVING, NOT_SERVING, UNKNOWN, or\n"
    "SERVICE_UNKNOWN when the server does not know the service. Without --service the whole\n"
    "server is asked about (the empty service name); --service riskbound.v1.RiskBound asks\n"
    "about the riskbound API itself. A server that has started draining (SIGTERM) answers\n"
    "NOT_SERVING. Meant as a probe (a container HEALTHCHECK, a deployment script): the\n"
    "default --timeout is 2 seconds, and the exit code alone tells the answer.\n"
    "\n"
    "exit codes: 0 SERVING; 6 the server answered, but not SERVING (NOT_SERVING, UNKNOWN, or\n"
    "SERVICE_UNKNOWN); 4 server unreachable (unavailable, or no answer within --timeout);\n"
    "2 usage; 1 other failure (e.g. the server has no health service).";

std::vector<OptionSpec> Specs() {
  std::vector<OptionSpec> specs = {
      {"service", "NAME",
       "service to ask about, e.g. riskbound.v1.RiskBound (default: \"\", the whole server)"},
      {"output", "table|json", "output format (default table)"},
  };
  for (OptionSpec& s : ConnectionOptions()) {
    if (s.name == "timeout") s.help = "deadline of the check (default 2)";
    specs.push_back(s);
  }
  return specs;
}

// HealthCheckRequest{service}: field 1, length-delimited.
grpc::ByteBuffer EncodeRequest(const std::string& service) {
  std::string bytes;
  {
    google::protobuf::io::StringOutputStream stream(&bytes);
    google::protobuf::io::CodedOutputStream out(&stream);
    if (!service.empty()) {  // proto3: the default value is not written
      out.WriteTag(google::protobuf::internal::WireFormatLite::MakeTag(
          1, google::protobuf::internal::WireFormatLite::WIRETYPE_LENGTH_DELIMITED));
      out.WriteVarint32(static_cast<std::uint32_t>(service.size()));
      out.WriteString(service);
    }
  }
  grpc::Slice slice(bytes);
  return grpc::ByteBuffer(&slice, 1);
}

// HealthCheckResponse.status (field 1, varint); unknown fields are skipped.
// nullopt when the bytes are not a well-formed message.
std::optional<std::uint64_t> DecodeStatus(const grpc::ByteBuffer& buffer) {
  std::vector<grpc::Slice> slices;
  if (!buffer.Dump(&slices).ok()) return std::nullopt;
  std::string bytes;
  for (const grpc::Slice& s : slices) {
    bytes.append(reinterpret_cast<const char*>(s.begin()), s.size());
  }
  google::protobuf::io::CodedInputStream in(reinterpret_cast<const std::uint8_t*>(bytes.data()),
                                            static_cast<int>(bytes.size()));
  std::uint64_t status = 0;  // proto3 default: UNKNOWN
  while (true) {
    const std::uint32_t tag = in.ReadTag();
    if (tag == 0) return in.ConsumedEntireMessage() ? std::optional(status) : std::nullopt;
    if (tag == google::protobuf::internal::WireFormatLite::MakeTag(
                   1, google::protobuf::internal::WireFormatLite::WIRETYPE_VARINT)) {
      if (!in.ReadVarint64(&status)) return std::nullopt;
    } else if (!google::protobuf::internal::WireFormatLite::SkipField(&in, tag)) {
      return std::nullopt;
    }
  }
}

std::string StatusName(std::uint64_t status) {
  switch (status) {
    case 0: return "UNKNOWN";
    case 1: return "SERVING";
    case 2: return "NOT_SERVING";
    case 3: return "SERVICE_UNKNOWN";
    default: return absl::StrCat("UNKNOWN_STATUS_", status);
  }
}

void Print(const std::string& status, const std::string& service, const ClientOptions& client,
           bool json, std::ostream& out) {
  if (json) {
    // HealthCheckResponse in the protobuf JSON mapping.
    out << "{\n  \"status\": \"" << status << "\"\n}\n";
    return;
  }
  out << status << "\n"
      << (service.empty() ? std::string("the whole server") : absl::StrCat("service ", service))
      << " at " << client.server << "\n";
}

}  // namespace

int RunHealth(const std::vector<std::string>& args, std::ostream& out, std::ostream& err) {
  CommandStart start;
  if (auto done = StartCommand("health", kUsage, kSummary, Specs(), args, out, err, &start)) {
    return *done;
  }
  ClientOptions client = start.client;
  if (!start.args.Has("timeout")) client.timeout = absl::Seconds(kDefaultTimeoutSeconds);
  const std::string service = start.args.Get("service").value_or("");

  // The same channel (TLS or plaintext) and token as every other command;
  // the health service itself needs no token.
  auto channel = MakeChannel(client);
  grpc::GenericStub stub(channel);
  grpc::ClientContext context;
  context.set_deadline(std::chrono::system_clock::now() +
                       absl::ToChronoMilliseconds(client.timeout));
  AddCallCredentials(client, &context);
  const grpc::ByteBuffer request = EncodeRequest(service);
  grpc::ByteBuffer response;
  std::promise<grpc::Status> done;
  stub.UnaryCall(&context, kMethod, grpc::StubOptions(), &request, &response,
                 [&done](grpc::Status s) { done.set_value(std::move(s)); });
  const grpc::Status status = done.get_future().get();

  if (status.error_code() == grpc::StatusCode::NOT_FOUND) {
    Print("SERVICE_UNKNOWN", service, client, start.json, out);
    err << "riskbound health: the server at " << client.server << " does not know the service \""
        << service << "\"\n";
    return kExitNotServing;
  }
  if (status.error_code() == grpc::StatusCode::UNIMPLEMENTED) {
    err << "riskbound health: the server at " << client.server
        << " has no gRPC health service (grpc.health.v1.Health): " << status.error_message()
        << "\n";
    return kExitInternal;
  }
  if (!status.ok()) return ReportRpcError(status, client, err);

  const std::optional<std::uint64_t> code = DecodeStatus(response);
  if (!code.has_value()) {
    err << "riskbound health: the server at " << client.server
        << " answered with a malformed grpc.health.v1.HealthCheckResponse\n";
    return kExitInternal;
  }
  Print(StatusName(*code), service, client, start.json, out);
  return *code == 1 ? kExitOk : kExitNotServing;
}

}  // namespace riskbound::cli
