#include "service/rpc/http_gateway.h"

#include <utility>

#include "absl/strings/str_cat.h"
#include "absl/synchronization/notification.h"
#include "absl/time/clock.h"
#include "google/protobuf/util/json_util.h"
#include "httplib.h"
#include "google/rpc/status.pb.h"
#include "service/core/stop.h"
#include "service/rpc/handlers.h"
#include "service/rpc/logging.h"
#include "service/rpc/request_id.h"
#include "service/rpc/status.h"

namespace riskbound::rpc {
namespace {

constexpr char kJson[] = "application/json";
// The JSON methods' paths, for the answer to an unknown path.
constexpr char kMethodPaths[] =
    "/v1/Certify, /v1/EstimateCapacity, /v1/Gate, /v1/SelectStructure, /v1/PlanSamples, "
    "/v1/ListFamilies, /v1/FitEffectiveVcDimension";

// The outcome of one JSON call.
struct JsonAnswer {
  absl::StatusCode code = absl::StatusCode::kOk;
  std::string body;
  std::string message;  // the error message, for the log line
};

JsonAnswer Error(const absl::Status& status) {
  return {status.code(), ErrorJson(status), std::string(status.message())};
}

// The caller's X-Request-Id header when usable, else a fresh one
// (request_id.h).
std::string RequestIdOf(const httplib::Request& req) {
  if (!req.has_header(kRequestIdKey)) return RequestIdFor(absl::nullopt);
  return RequestIdFor(req.get_header_value(kRequestIdKey));
}

// Runs `handler` on the pool for a JSON body.
template <class Request, class Response>
JsonAnswer RunJson(CallPool* pool, const CallLimits& limits, const std::string& body,
                   absl::string_view request_id,
                   absl::StatusOr<Response> (*handler)(const Request&, const CallInfo&)) {
  Request request;
  google::protobuf::util::JsonParseOptions parse;
  parse.ignore_unknown_fields = false;
  // An empty body is the empty message, as "{}" is.
  const google::protobuf::StringPiece json =
      body.empty() ? google::protobuf::StringPiece("{}") : google::protobuf::StringPiece(body);
  if (auto parsed = google::protobuf::util::JsonStringToMessage(json, &request, parse);
      !parsed.ok()) {
    return Error(absl::InvalidArgumentError(
        absl::StrCat("the request body could not be decoded as ",
                     Request::descriptor()->full_name(),
                     " in the protobuf JSON mapping: ", std::string(parsed.message()))));
  }
  core::StopToken stop(absl::Now() + limits.max_call_time);
  absl::Notification done;
  absl::StatusOr<Response> answer = absl::UnknownError("not run");
  const CallPool::Admission admission = pool->TrySubmit([&] {
    answer = stop.StopRequested() ? absl::StatusOr<Response>(stop.Status())
                                  : handler(request, {.stop = stop, .request_id = request_id});
    done.Notify();
  });
  if (admission == CallPool::Admission::kFull) {
    return Error(absl::ResourceExhaustedError(absl::StrCat(
        "the server is busy: ", pool->max_pending(),
        " calls are already admitted (--max-pending-calls); retry with backoff")));
  }
  if (admission == CallPool::Admission::kClosed) {
    return Error(absl::UnavailableError("the server is shutting down; retry on another replica"));
  }
  done.WaitForNotification();  // the work holds references to this frame
  if (!answer.ok()) {
    if (answer.status().code() == absl::StatusCode::kDeadlineExceeded) {
      return Error(absl::DeadlineExceededError(
          absl::StrCat(Request::descriptor()->name(), " was stopped after the server's per-call limit of ",
                       absl::FormatDuration(limits.max_call_time), " (--max-call-seconds)")));
    }
    return Error(answer.status());
  }
  if (static_cast<std::int64_t>(answer->ByteSizeLong()) > limits.max_response_bytes) {
    return Error(absl::ResourceExhaustedError(absl::StrCat(
        "the answer would be ", answer->ByteSizeLong(), " bytes, above the server's limit of ",
        limits.max_response_bytes, " bytes (--max-response-bytes)")));
  }
  std::string out;
  google::protobuf::util::JsonPrintOptions print;
  (void)google::protobuf::util::MessageToJsonString(*answer, &out, print);
  return {absl::StatusCode::kOk, out, std::string()};
}

}  // namespace

int HttpStatusFor(absl::StatusCode code) {
  switch (code) {
    case absl::StatusCode::kOk: return 200;
    case absl::StatusCode::kInvalidArgument:
    case absl::StatusCode::kFailedPrecondition:
    case absl::StatusCode::kOutOfRange: return 400;
    case absl::StatusCode::kUnauthenticated: return 401;
    case absl::StatusCode::kPermissionDenied: return 403;
    case absl::StatusCode::kNotFound: return 404;
    case absl::StatusCode::kAlreadyExists:
    case absl::StatusCode::kAborted: return 409;
    case absl::StatusCode::kResourceExhausted: return 429;
    case absl::StatusCode::kCancelled: return 499;
    case absl::StatusCode::kUnimplemented: return 501;
    case absl::StatusCode::kUnavailable: return 503;
    case absl::StatusCode::kDeadlineExceeded: return 504;
    default: return 500;
  }
}

std::string ErrorJson(const absl::Status& status) {
  // The google.rpc.Status a gRPC client gets in grpc-status-details-bin
  // (same sanitized message, same violations and caps), or code and message.
  const grpc::Status wire = ToGrpcStatus(status);
  google::rpc::Status body;
  if (wire.error_details().empty() || !body.ParseFromString(wire.error_details())) {
    body.Clear();
    body.set_code(static_cast<int>(status.code()));
    body.set_message(wire.error_message());
  }
  std::string out;
  if (!google::protobuf::util::MessageToJsonString(body, &out).ok()) {
    out = absl::StrCat("{\"code\":", static_cast<int>(status.code()), ",\"message\":\"",
                       JsonEscape(wire.error_message()), "\"}");
  }
  return out;
}

namespace {

// The HTTPS context: TLS 1.2 or later, the certificate chain and key, and,
// for mutual TLS, a required client certificate verified against the client
// CA (OpenSSL checks its chain and validity dates).
bool SetUpTls(const TlsFiles& tls, SSL_CTX& ctx) {
  SSL_CTX_set_min_proto_version(&ctx, TLS1_2_VERSION);
  if (SSL_CTX_use_certificate_chain_file(&ctx, tls.cert_file.c_str()) != 1 ||
      SSL_CTX_use_PrivateKey_file(&ctx, tls.key_file.c_str(), SSL_FILETYPE_PEM) != 1 ||
      SSL_CTX_check_private_key(&ctx) != 1) {
    return false;
  }
  if (tls.mutual()) {
    if (SSL_CTX_load_verify_locations(&ctx, tls.client_ca_file.c_str(), nullptr) != 1) {
      return false;
    }
    STACK_OF(X509_NAME)* names = SSL_load_client_CA_file(tls.client_ca_file.c_str());
    if (names != nullptr) SSL_CTX_set_client_CA_list(&ctx, names);
    SSL_CTX_set_verify(&ctx, SSL_VERIFY_PEER | SSL_VERIFY_FAIL_IF_NO_PEER_CERT, nullptr);
  }
  return true;
}

std::unique_ptr<httplib::Server> MakeServer(const TlsFiles& tls) {
  if (!tls.enabled()) return std::make_unique<httplib::Server>();
  return std::make_unique<httplib::SSLServer>(
      [tls](SSL_CTX& ctx) { return SetUpTls(tls, ctx); });
}

// The JSON methods, for the metrics' rpc label of a refused call (a fixed
// set: a path never becomes a label).
constexpr const char* kMethods[] = {"Certify", "EstimateCapacity", "Gate", "SelectStructure",
                                    "PlanSamples", "FitEffectiveVcDimension"};

}  // namespace

HttpGateway::HttpGateway(CallPool* pool, CallLimits limits, Metrics* metrics,
                         const TokenAuthenticator* auth, TlsFiles tls)
    : pool_(pool),
      limits_(limits),
      metrics_(metrics),
      auth_(auth),
      tls_(std::move(tls)),
      server_(MakeServer(tls_)) {}

HttpGateway::~HttpGateway() { Stop(); }

void HttpGateway::Route() {
  server_->set_payload_max_length(static_cast<std::size_t>(limits_.max_request_bytes));
  if (auth_ != nullptr) {
    server_->set_pre_routing_handler([this](const httplib::Request& req,
                                            httplib::Response& res) {
      if (auth_->Check(req.get_header_value("Authorization"))) {
        return httplib::Server::HandlerResponse::Unhandled;
      }
      metrics_->RecordRefusal("unauthenticated");
      for (const char* name : kMethods) {
        if (req.path == absl::StrCat("/v1/", name)) {
          metrics_->RecordCall("http", name, absl::StatusCode::kUnauthenticated,
                               absl::ZeroDuration());
        }
      }
      res.status = HttpStatusFor(absl::StatusCode::kUnauthenticated);
      res.set_header("WWW-Authenticate", "Bearer");
      res.set_content(ErrorJson(absl::UnauthenticatedError(kUnauthenticatedMessage)), kJson);
      return httplib::Server::HandlerResponse::Handled;
    });
  }
  server_->Get("/metrics", [this](const httplib::Request&, httplib::Response& res) {
    res.set_content(metrics_->Render(), "text/plain; version=0.0.4; charset=utf-8");
  });
  auto method = [this](const char* name, auto handler) {
    server_->Post(absl::StrCat("/v1/", name),
                  [this, name, handler](const httplib::Request& req, httplib::Response& res) {
                    const absl::Time start = absl::Now();
                    const std::string request_id = RequestIdOf(req);
                    const JsonAnswer answer =
                        draining_.load()
                            ? Error(absl::UnavailableError(
                                  "the server is shutting down; retry on another replica"))
                            : RunJson(pool_, limits_, req.body, request_id, handler);
                    res.status = HttpStatusFor(answer.code);
                    res.set_header(kRequestIdKey, request_id);
                    res.set_content(answer.body, kJson);
                    metrics_->RecordCall("http", name, answer.code, absl::Now() - start);
                    const std::string peer = absl::StrCat(req.remote_addr, ":",
                                                          req.remote_port);
                    LogCall({.transport = "http",
                             .rpc = name,
                             .code = answer.code,
                             .latency_us = absl::ToInt64Microseconds(absl::Now() - start),
                             .peer = peer,
                             .request_id = request_id,
                             .message = answer.code == absl::StatusCode::kOk
                                            ? absl::string_view()
                                            : absl::string_view(answer.message),
                             .request_bytes = static_cast<std::int64_t>(req.body.size()),
                             .response_bytes = static_cast<std::int64_t>(answer.body.size())});
                  });
  };
  method("Certify", &HandleCertify);
  method("EstimateCapacity", &HandleEstimateCapacity);
  method("Gate", &HandleGate);
  method("SelectStructure", &HandleSelectStructure);
  method("PlanSamples", &HandlePlanSamples);
  method("ListFamilies", &HandleListFamilies);
  method("FitEffectiveVcDimension", &HandleFitEffectiveVcDimension);
  server_->set_error_handler([](const httplib::Request& req, httplib::Response& res) {
    if (!res.body.empty()) return;
    res.set_header(kRequestIdKey, RequestIdOf(req));
    absl::Status s =
        res.status == 404
            ? absl::NotFoundError(absl::StrCat(
                  "no such path: ", req.method, " ", req.path, " (the methods are POST ",
                  kMethodPaths, " with a JSON body; the metrics are GET /metrics)"))
        : res.status == 413
            ? absl::ResourceExhaustedError(
                  "the request body is above the server's limit (--max-request-bytes)")
        : res.status == 400
            ? absl::InvalidArgumentError(
                  "the HTTP request could not be read (a POST needs its body's length in "
                  "Content-Length or chunked encoding; send {} for a request with no fields)")
            : absl::InvalidArgumentError(absl::StrCat("HTTP ", res.status));
    res.set_content(ErrorJson(s), kJson);
  });
}

absl::Status HttpGateway::Start(const std::string& host, int port) {
  if (!server_->is_valid()) {
    return absl::InvalidArgumentError(absl::StrCat(
        "the HTTP port cannot use the TLS files (--tls-cert-file ", tls_.cert_file,
        ", --tls-key-file ", tls_.key_file,
        tls_.mutual() ? absl::StrCat(", --tls-client-ca-file ", tls_.client_ca_file) : "", ")"));
  }
  Route();
  if (port == 0) {
    port_ = server_->bind_to_any_port(host);
    if (port_ <= 0) port_ = 0;
  } else if (server_->bind_to_port(host, port)) {
    port_ = port;
  }
  if (port_ == 0) {
    return absl::UnavailableError(absl::StrCat("cannot listen for HTTP on ", host, ":", port,
                                               " (address in use, malformed, or not local)"));
  }
  thread_ = std::thread([this] { server_->listen_after_bind(); });
  return absl::OkStatus();
}

void HttpGateway::Stop() {
  if (!thread_.joinable()) return;
  server_->stop();
  thread_.join();
}

}  // namespace riskbound::rpc
