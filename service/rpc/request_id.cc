#include "service/rpc/request_id.h"

#include <algorithm>
#include <cstdint>

#include "absl/random/random.h"
#include "absl/strings/str_format.h"

namespace riskbound::rpc {

bool UsableRequestId(absl::string_view given) {
  return !given.empty() && given.size() <= kMaxRequestIdBytes &&
         std::all_of(given.begin(), given.end(), [](char c) {
           const unsigned char u = static_cast<unsigned char>(c);
           return u >= 0x21 && u <= 0x7E;
         });
}

std::string NewRequestId() {
  thread_local absl::BitGen bits;
  const std::uint64_t high = absl::Uniform<std::uint64_t>(bits);
  const std::uint64_t low = absl::Uniform<std::uint64_t>(bits);
  return absl::StrFormat("%016x%016x", high, low);
}

std::string RequestIdFor(absl::optional<absl::string_view> given) {
  if (given.has_value() && UsableRequestId(*given)) return std::string(*given);
  return NewRequestId();
}

}  // namespace riskbound::rpc
