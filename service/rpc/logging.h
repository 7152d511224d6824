// Logging of the server: the format (text or JSON lines) chosen once at start,
// one line per finished call with separate fields, and the gRPC and protobuf
// libraries' own messages routed through the same sink, so that no raw
// library line bypasses --log-format json.
#ifndef RISKBOUND_SERVICE_RPC_LOGGING_H_
#define RISKBOUND_SERVICE_RPC_LOGGING_H_

#include <cstdint>
#include <string>

#include "absl/status/status.h"
#include "absl/strings/string_view.h"

namespace riskbound::rpc {

enum class LogFormat { kText, kJson };

// ConfigureLogging
// Sets the format and the minimum level ("debug", "info", "warn", "error")
// of every log line, and routes the gRPC and protobuf libraries' messages
// through it (at debug level, errors at warn). Call once at start, before any
// other thread logs. INVALID_ARGUMENT for an unknown level.
absl::Status ConfigureLogging(LogFormat format, absl::string_view level);

// The fields of one finished call.
struct CallRecord {
  absl::string_view transport;   // "grpc" or "http" (the HTTP port's JSON methods)
  absl::string_view rpc;         // method name, e.g. "Certify"
  absl::StatusCode code = absl::StatusCode::kOk;
  std::int64_t latency_us = 0;   // from admission to the answer
  absl::string_view peer;        // the client's address as gRPC reports it
  absl::string_view request_id;  // x-request-id, given or generated
  absl::string_view message;     // the error message (may quote request values)
  std::int64_t request_bytes = 0;
  std::int64_t response_bytes = 0;
};

// LogCall
// Writes one line for a finished call at debug level: in JSON, one object
// with the fields "transport", "rpc", "code", "latency_us", "peer", "request_id",
// "request_bytes", "response_bytes" and, for an error, "error"; in text,
// the same as key=value pairs. Error messages can quote request values, so
// they are written at debug level only. Thread-safe.
void LogCall(const CallRecord& record);

// CallLogging
// True when LogCall writes lines (the level is debug), so that a caller can
// skip gathering fields that cost something (the peer address). Thread-safe.
bool CallLogging();

// JsonEscape
// `text` escaped for the inside of a JSON string (quotes, backslashes,
// control characters as \uXXXX). Exposed for tests.
std::string JsonEscape(absl::string_view text);

}  // namespace riskbound::rpc

#endif  // RISKBOUND_SERVICE_RPC_LOGGING_H_
