// Bearer-token authentication of calls (RFC 6750's "Authorization: Bearer
// <token>", as gRPC metadata `authorization` or an HTTP header).
//
// The tokens come from a file, one a line, so that a new token can be added
// before the old one is removed (rotation); the file is read at start and
// again on Reload (the server calls it on SIGHUP). Tokens are kept only as
// SHA-256 digests, and a presented token is compared by its digest against
// every stored digest with OpenSSL's CRYPTO_memcmp, without stopping at the
// first match: the time taken does not depend on how much of a token was
// right. No token, nor any part of one, is ever written to a log or an
// error message.
//
// Where it is checked: in RiskBoundService (RiskBoundService::Authenticated,
// asked by Dispatch, the raw callback path of every unary riskbound.v1
// method, and by the ScoreRegistry stream before it admits itself) and in
// the HTTP gateway, not in a grpc::AuthMetadataProcessor. A processor runs only under TLS credentials
// (a plaintext loopback server could not require tokens), cannot tell the
// health service from the API without parsing paths itself, and refuses
// before the service can count the refusal in the metrics. Dispatch leaves
// grpc.health.v1 (probes) and server reflection (the public schema, no
// computation) open by construction, and refuses before a call is admitted
// to the CallPool, so an unauthenticated flood costs no computing thread.
#ifndef RISKBOUND_SERVICE_RPC_AUTH_H_
#define RISKBOUND_SERVICE_RPC_AUTH_H_

#include <array>
#include <cstdint>
#include <memory>
#include <string>
#include <vector>

#include "absl/base/thread_annotations.h"
#include "absl/status/status.h"
#include "absl/status/statusor.h"
#include "absl/strings/string_view.h"
#include "absl/synchronization/mutex.h"

namespace riskbound::rpc {

// The one message of every refusal: the same for a missing header, another
// scheme, an empty token and a wrong token, so that it gives no hint which
// part was wrong.
inline constexpr char kUnauthenticatedMessage[] =
    "this server requires a valid bearer token (authorization: Bearer <token>)";

// Shortest token accepted in the file (16 characters; 32 random hex digits
// from `openssl rand -hex 16` and up is common practice).
inline constexpr std::size_t kMinTokenLength = 16;

// ParseTokenFile
// The tokens of a token file's text: one a line; surrounding whitespace is
// dropped, empty lines and lines starting with '#' are skipped. A token is
// RFC 6750's b64token (letters, digits and "-._~+/", then any number of "=")
// of at least kMinTokenLength characters. INVALID_ARGUMENT naming the line
// number (never its content) for a bad line, or when there is no token.
absl::StatusOr<std::vector<std::string>> ParseTokenFile(absl::string_view text);

// TokenAuthenticator
// Thread-safe: Check runs on gRPC's and the HTTP server's threads while
// Reload runs on the signal thread.
class TokenAuthenticator {
 public:
  // Load
  // Reads `path` (ParseTokenFile). NOT_FOUND / PERMISSION_DENIED when it
  // cannot be read, INVALID_ARGUMENT when a line is bad; the messages name
  // the file and line, never a token.
  static absl::StatusOr<std::unique_ptr<TokenAuthenticator>> Load(const std::string& path);

  // Reload
  // Reads the file again. On success the new tokens replace the old ones at
  // once and the number of tokens is returned; on failure the old tokens stay
  // in force and the error is returned.
  absl::StatusOr<int> Reload();

  // Check
  // True when `authorization` is "Bearer <token>" (the scheme in any case,
  // one or more spaces) with a token from the file. Constant time in the
  // stored tokens' contents.
  bool Check(absl::string_view authorization) const;

  const std::string& path() const { return path_; }
  int token_count() const;

 private:
  using Digest = std::array<std::uint8_t, 32>;
  TokenAuthenticator(std::string path, std::vector<Digest> digests);
  static absl::StatusOr<std::vector<Digest>> Read(const std::string& path);

  // Constant after construction.
  const std::string path_;

  mutable absl::Mutex mu_;
  std::vector<Digest> digests_ ABSL_GUARDED_BY(mu_);
};

}  // namespace riskbound::rpc

#endif  // RISKBOUND_SERVICE_RPC_AUTH_H_
