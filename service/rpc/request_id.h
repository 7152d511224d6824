// The request id of a call: the caller's when it is usable, else a fresh one.
//
// A caller (a deploy pipeline, a proxy) may send an id with its call, as
// x-request-id metadata on gRPC or the X-Request-Id header on the HTTP port,
// to find the call later in the server's logs and in a Gate answer's audit
// record. The server sends the id back in the answer's x-request-id initial
// metadata (HTTP: X-Request-Id response header), logs it in the call's line
// and copies it into AuditRecord.request_id.
#ifndef RISKBOUND_SERVICE_RPC_REQUEST_ID_H_
#define RISKBOUND_SERVICE_RPC_REQUEST_ID_H_

#include <cstddef>
#include <string>

#include "absl/strings/string_view.h"
#include "absl/types/optional.h"

namespace riskbound::rpc {

// The metadata key (gRPC) and header name (HTTP, case-insensitive).
inline constexpr char kRequestIdKey[] = "x-request-id";

// Longest caller's id kept, in bytes.
inline constexpr std::size_t kMaxRequestIdBytes = 128;

// UsableRequestId
// True when `given` is 1 to kMaxRequestIdBytes visible ASCII characters
// (0x21 to 0x7E: no space, no control character, nothing outside ASCII), so
// that it is safe in a text log line, a JSON string and a header as it is.
bool UsableRequestId(absl::string_view given);

// NewRequestId
// 32 lower-case hex digits: 128 bits from absl::BitGen (seeded from the
// operating system's entropy; unique, not secret). Thread-safe.
std::string NewRequestId();

// RequestIdFor
// `given` when there is one and UsableRequestId(*given), else NewRequestId().
// Thread-safe.
std::string RequestIdFor(absl::optional<absl::string_view> given);

}  // namespace riskbound::rpc

#endif  // RISKBOUND_SERVICE_RPC_REQUEST_ID_H_
