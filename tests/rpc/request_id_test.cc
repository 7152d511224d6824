// The request id rules (request_id.h): which caller ids are kept, and the
// form of generated ones. The ids' way through the real server (metadata,
// header, log line, audit record) is tests/integration/request_id_test.py.
#include "service/rpc/request_id.h"

#include <set>
#include <string>

#include "gtest/gtest.h"

namespace riskbound::rpc {
namespace {

// Visible ASCII is 0x21 '!' to 0x7E '~' (ASCII table, ANSI X3.4-1986).
TEST(RequestIdTest, KeepsOneTo128VisibleAsciiCharacters) {
  EXPECT_TRUE(UsableRequestId("a"));
  EXPECT_TRUE(UsableRequestId("deploy-2291/step-4:certify"));
  EXPECT_TRUE(UsableRequestId("!~"));
  EXPECT_TRUE(UsableRequestId(std::string(128, 'x')));
  std::string every_visible;
  for (int c = 0x21; c <= 0x7E; ++c) every_visible += static_cast<char>(c);
  EXPECT_TRUE(UsableRequestId(every_visible));  // 94 characters
}

TEST(RequestIdTest, RefusesEmptyLongSpacesControlsAndNonAscii) {
  EXPECT_FALSE(UsableRequestId(""));
  EXPECT_FALSE(UsableRequestId(std::string(129, 'x')));
  EXPECT_FALSE(UsableRequestId("two words"));
  EXPECT_FALSE(UsableRequestId("tab\there"));
  EXPECT_FALSE(UsableRequestId("line\nbreak"));
  EXPECT_FALSE(UsableRequestId(std::string("nul\0byte", 8)));
  EXPECT_FALSE(UsableRequestId("del\x7f"));
  EXPECT_FALSE(UsableRequestId("caf\xc3\xa9"));  // UTF-8 e-acute
}

TEST(RequestIdTest, GeneratedIdsAre32LowerCaseHexDigitsAndDiffer) {
  std::set<std::string> seen;
  for (int i = 0; i < 1000; ++i) {
    const std::string id = NewRequestId();
    ASSERT_EQ(id.size(), 32u) << id;
    for (char c : id) {
      EXPECT_TRUE((c >= '0' && c <= '9') || (c >= 'a' && c <= 'f')) << id;
    }
    EXPECT_TRUE(UsableRequestId(id));
    seen.insert(id);
  }
  // 1000 draws of 128 random bits: a repeat has probability below 1e-32
  // (birthday bound n^2 / 2^129).
  EXPECT_EQ(seen.size(), 1000u);
}

TEST(RequestIdTest, RequestIdForKeepsUsableAndReplacesTheRest) {
  EXPECT_EQ(RequestIdFor(absl::string_view("release-88")), "release-88");
  EXPECT_EQ(RequestIdFor(absl::nullopt).size(), 32u);
  const std::string replaced = RequestIdFor(absl::string_view("has space"));
  EXPECT_EQ(replaced.size(), 32u);
  EXPECT_NE(replaced, "has space");
}

}  // namespace
}  // namespace riskbound::rpc
