// StatusIs: a gMock matcher on the code (and optionally the message) of an
// absl::Status or absl::StatusOr<T>. Abseil 20220623 ships none.
#ifndef RISKBOUND_TESTS_TESTING_STATUS_MATCHERS_H_
#define RISKBOUND_TESTS_TESTING_STATUS_MATCHERS_H_

#include <string>

#include "absl/status/status.h"
#include "absl/status/statusor.h"
#include "gmock/gmock.h"

namespace riskbound::testing {

inline const absl::Status& GetStatus(const absl::Status& s) { return s; }
template <typename T>
const absl::Status& GetStatus(const absl::StatusOr<T>& s) {
  return s.status();
}

MATCHER_P(StatusIs, code, "has status code " + absl::StatusCodeToString(code)) {
  const absl::Status& s = GetStatus(arg);
  *result_listener << "status is " << s;
  return s.code() == code;
}

MATCHER_P2(StatusIs, code, message_matcher,
           "has status code " + absl::StatusCodeToString(code)) {
  const absl::Status& s = GetStatus(arg);
  *result_listener << "status is " << s;
  return s.code() == code &&
         ::testing::ExplainMatchResult(message_matcher, std::string(s.message()),
                                       result_listener);
}

}  // namespace riskbound::testing

#endif  // RISKBOUND_TESTS_TESTING_STATUS_MATCHERS_H_
