#include "service/rpc/auth.h"

#include <fstream>
#include <sstream>
#include <utility>

#include <openssl/crypto.h>
#include <openssl/evp.h>

#include "absl/strings/ascii.h"
#include "absl/strings/match.h"
#include "absl/strings/str_cat.h"
#include "absl/strings/str_split.h"
#include "absl/strings/strip.h"

namespace riskbound::rpc {
namespace {

// RFC 6750 section 2.1: b64token = 1*( ALPHA / DIGIT / "-" / "." / "_" / "~"
// / "+" / "/" ) *"=".
bool IsB64Token(absl::string_view token) {
  std::size_t i = 0;
  while (i < token.size() &&
         (absl::ascii_isalnum(static_cast<unsigned char>(token[i])) ||
          absl::string_view("-._~+/").find(token[i]) != absl::string_view::npos)) {
    ++i;
  }
  if (i == 0) return false;
  while (i < token.size() && token[i] == '=') ++i;
  return i == token.size();
}

}  // namespace

absl::StatusOr<std::vector<std::string>> ParseTokenFile(absl::string_view text) {
  std::vector<std::string> tokens;
  int number = 0;
  for (absl::string_view line : absl::StrSplit(text, '\n')) {
    ++number;
    line = absl::StripAsciiWhitespace(line);
    if (line.empty() || line[0] == '#') continue;
    if (!IsB64Token(line)) {
      return absl::InvalidArgumentError(absl::StrCat(
          "line ", number,
          ": not a bearer token (one token a line: letters, digits and -._~+/ then any '=')"));
    }
    if (line.size() < kMinTokenLength) {
      return absl::InvalidArgumentError(absl::StrCat("line ", number, ": a token needs at least ",
                                                     kMinTokenLength, " characters"));
    }
    tokens.emplace_back(line);
  }
  if (tokens.empty()) {
    return absl::InvalidArgumentError("no token (one token a line; '#' starts a comment)");
  }
  return tokens;
}

TokenAuthenticator::TokenAuthenticator(std::string path, std::vector<Digest> digests)
    : path_(std::move(path)), digests_(std::move(digests)) {}

namespace {

std::array<std::uint8_t, 32> Sha256(absl::string_view text) {
  std::array<std::uint8_t, 32> out{};
  unsigned int size = 0;
  EVP_Digest(text.data(), text.size(), out.data(), &size, EVP_sha256(), nullptr);
  return out;
}

}  // namespace

absl::StatusOr<std::vector<TokenAuthenticator::Digest>> TokenAuthenticator::Read(
    const std::string& path) {
  std::ifstream in(path, std::ios::binary);
  if (!in) {
    return absl::NotFoundError(absl::StrCat("--auth-token-file: cannot read ", path));
  }
  std::stringstream buffer;
  buffer << in.rdbuf();
  if (in.bad()) return absl::NotFoundError(absl::StrCat("--auth-token-file: cannot read ", path));
  std::string text = buffer.str();
  auto tokens = ParseTokenFile(text);
  OPENSSL_cleanse(text.data(), text.size());
  if (!tokens.ok()) {
    return absl::InvalidArgumentError(
        absl::StrCat("--auth-token-file ", path, ": ", tokens.status().message()));
  }
  std::vector<Digest> digests;
  digests.reserve(tokens->size());
  for (std::string& token : *tokens) {
    digests.push_back(Sha256(token));
    OPENSSL_cleanse(token.data(), token.size());
  }
  return digests;
}

absl::StatusOr<std::unique_ptr<TokenAuthenticator>> TokenAuthenticator::Load(
    const std::string& path) {
  auto digests = Read(path);
  if (!digests.ok()) return digests.status();
  return std::unique_ptr<TokenAuthenticator>(new TokenAuthenticator(path, *std::move(digests)));
}

absl::StatusOr<int> TokenAuthenticator::Reload() {
  auto digests = Read(path_);
  if (!digests.ok()) return digests.status();
  absl::MutexLock lock(&mu_);
  digests_ = *std::move(digests);
  return static_cast<int>(digests_.size());
}

int TokenAuthenticator::token_count() const {
  absl::MutexLock lock(&mu_);
  return static_cast<int>(digests_.size());
}

bool TokenAuthenticator::Check(absl::string_view authorization) const {
  // RFC 7235: the scheme is case-insensitive, then one or more spaces.
  constexpr absl::string_view kScheme = "bearer";
  if (authorization.size() <= kScheme.size() ||
      !absl::EqualsIgnoreCase(authorization.substr(0, kScheme.size()), kScheme) ||
      authorization[kScheme.size()] != ' ') {
    return false;
  }
  absl::string_view token = absl::StripLeadingAsciiWhitespace(authorization.substr(kScheme.size()));
  token = absl::StripTrailingAsciiWhitespace(token);
  if (token.empty()) return false;
  const Digest presented = Sha256(token);
  int matched = 0;
  absl::MutexLock lock(&mu_);
  for (const Digest& digest : digests_) {  // every digest, no early exit
    matched |= CRYPTO_memcmp(presented.data(), digest.data(), digest.size()) == 0 ? 1 : 0;
  }
  return matched != 0;
}

}  // namespace riskbound::rpc
