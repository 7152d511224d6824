// Field violations (service/core/field_violation.h): the cap on listed
// violations and the summary, sanitizing and truncation of every path and
// description, the bound on the message, the structured payload (a newline
// or a netstring look-alike in a caller's id cannot forge a violation) and
// the size checks of limits.h.
#include "service/core/field_violation.h"

#include <string>
#include <vector>

#include "absl/strings/cord.h"
#include "absl/strings/str_cat.h"
#include "gmock/gmock.h"
#include "gtest/gtest.h"
#include "service/core/limits.h"
#include "tests/testing/status_matchers.h"

namespace riskbound::core {
namespace {

using ::riskbound::testing::StatusIs;
using ::testing::ElementsAre;
using ::testing::EndsWith;
using ::testing::HasSubstr;
using ::testing::IsEmpty;
using ::testing::Not;
using ::testing::SizeIs;
using ::testing::StartsWith;

std::string Msg(const absl::Status& s) { return std::string(s.message()); }

std::vector<FieldViolation> Numbered(std::size_t n, const std::string& description = "bad") {
  std::vector<FieldViolation> v;
  for (std::size_t i = 0; i < n; ++i) v.push_back({absl::StrCat("f[", i, "]"), description});
  return v;
}

// True when `s` is well-formed UTF-8 with no byte below 0x20 and no DEL.
// Source: RFC 3629 section 4 (UTF-8 syntax), the same table as Unicode 15.0
// Table 3-7 "Well-Formed UTF-8 Byte Sequences" (from memory); written here
// independently of the sanitizer as a plain table walk.
bool WellFormedPrintable(const std::string& s) {
  std::size_t i = 0;
  const auto at = [&](std::size_t k) { return static_cast<unsigned char>(s[k]); };
  while (i < s.size()) {
    const unsigned char b = at(i);
    if (b < 0x20 || b == 0x7F) return false;
    if (b < 0x80) {
      ++i;
      continue;
    }
    std::size_t n = 0;
    unsigned char lo = 0x80, hi = 0xBF;
    if (b >= 0xC2 && b <= 0xDF) n = 2;
    else if (b == 0xE0) { n = 3; lo = 0xA0; }
    else if ((b >= 0xE1 && b <= 0xEC) || b == 0xEE || b == 0xEF) n = 3;
    else if (b == 0xED) { n = 3; hi = 0x9F; }
    else if (b == 0xF0) { n = 4; lo = 0x90; }
    else if (b >= 0xF1 && b <= 0xF3) n = 4;
    else if (b == 0xF4) { n = 4; hi = 0x8F; }
    else return false;
    if (i + n > s.size()) return false;
    if (at(i + 1) < lo || at(i + 1) > hi) return false;
    for (std::size_t k = 2; k < n; ++k) {
      if (at(i + k) < 0x80 || at(i + k) > 0xBF) return false;
    }
    i += n;
  }
  return true;
}

TEST(InvalidFieldsTest, EmptyListIsOk) {
  EXPECT_TRUE(InvalidFields({}).ok());
  EXPECT_THAT(FieldViolationsOf(absl::OkStatus()), IsEmpty());
}

TEST(InvalidFieldsTest, FewViolationsRoundTripExactly) {
  // Field and description bytes that a separator-based encoding would
  // misread: the netstring delimiters, digits, semicolons, a backslash.
  // Source: the netstring format, Bernstein (1997): "<length>:<bytes>,".
  const std::vector<FieldViolation> in = {
      {"evidence.holdout.error_count", "7 errors exceed the 5 samples they were counted on"},
      {"structure[3].id", "id \"12:ab,cd;3:x,\" is used twice"},
      {"weights", "a\\nb with a backslash, 0:, and 99999999999999999999999:"},
      {"", ""},
  };
  const absl::Status status = InvalidFields(in);
  EXPECT_THAT(status, StatusIs(absl::StatusCode::kInvalidArgument));
  const std::vector<FieldViolation> out = FieldViolationsOf(status);
  ASSERT_THAT(out, SizeIs(in.size()));
  for (std::size_t i = 0; i < in.size(); ++i) {
    EXPECT_EQ(out[i].field, in[i].field) << i;
    EXPECT_EQ(out[i].description, in[i].description) << i;
  }
  const ViolationReport report = ViolationReportOf(status);
  EXPECT_EQ(report.unlisted_count, 0u);
  EXPECT_THAT(report.listed, SizeIs(in.size()));
  EXPECT_EQ(status.message(),
            "evidence.holdout.error_count: 7 errors exceed the 5 samples they were counted on; "
            "structure[3].id: id \"12:ab,cd;3:x,\" is used twice; weights: a\\nb with a "
            "backslash, 0:, and 99999999999999999999999:; : ");
}

TEST(InvalidFieldsTest, ListsTwentyAndSummarizesTheRest) {
  // The cap of 20 listed violations and the "and N more" summary are this
  // project's choice (issue: memory and trailer amplification), checked by
  // counting.
  const absl::Status status = InvalidFields(Numbered(25));
  const std::vector<FieldViolation> out = FieldViolationsOf(status);
  ASSERT_THAT(out, SizeIs(kMaxListedViolations + 1));
  for (std::size_t i = 0; i < kMaxListedViolations; ++i) {
    EXPECT_EQ(out[i].field, absl::StrCat("f[", i, "]"));
  }
  EXPECT_EQ(out.back().field, "request");
  EXPECT_EQ(out.back().description, "and 5 more invalid fields were not listed");
  const ViolationReport report = ViolationReportOf(status);
  EXPECT_THAT(report.listed, SizeIs(kMaxListedViolations));
  EXPECT_EQ(report.unlisted_count, 5u);
  EXPECT_THAT(Msg(status), StartsWith("f[0]: bad; f[1]: bad; "));
  EXPECT_THAT(Msg(status), EndsWith("f[19]: bad; and 5 more invalid fields"));
}

TEST(InvalidFieldsTest, ExactlyTwentyHasNoSummary) {
  const std::vector<FieldViolation> out = FieldViolationsOf(InvalidFields(Numbered(20)));
  ASSERT_THAT(out, SizeIs(20));
  EXPECT_EQ(out.back().field, "f[19]");
  EXPECT_EQ(FieldViolationsOf(InvalidFields(Numbered(21))).back().description,
            "and 1 more invalid field was not listed");
}

TEST(InvalidFieldsTest, CountsViolationsLeftOutEarlier) {
  // A caller merging a capped status passes on what that status left out.
  const absl::Status status = InvalidFields(Numbered(3), 40);
  const ViolationReport report = ViolationReportOf(status);
  EXPECT_THAT(report.listed, SizeIs(3));
  EXPECT_EQ(report.unlisted_count, 40u);
  EXPECT_THAT(Msg(status), EndsWith("f[2]: bad; and 40 more invalid fields"));
  const absl::Status only_count = InvalidFields({}, 4);
  EXPECT_THAT(only_count, StatusIs(absl::StatusCode::kInvalidArgument,
                                   "4 invalid fields (not listed)"));
  EXPECT_THAT(FieldViolationsOf(only_count),
              ElementsAre(::testing::Field(&FieldViolation::field, "request")));
}

// A violation that sums up others (also_counts) counts them as found but not
// listed, wherever it stands in the list.
TEST(InvalidFieldsTest, SummaryViolationsCountWhatTheyStandFor) {
  std::vector<FieldViolation> v = Numbered(2);
  v.push_back({"draws", "and 7 more invalid draws were not listed", 6});
  const ViolationReport report = ViolationReportOf(InvalidFields(v));
  EXPECT_THAT(report.listed, SizeIs(3));
  EXPECT_EQ(report.unlisted_count, 6u);
  std::vector<FieldViolation> many = Numbered(25);
  many.push_back({"draws", "and 100 more invalid draws were not listed", 99});
  EXPECT_EQ(ViolationReportOf(InvalidFields(many)).unlisted_count, 5u + 1u + 99u);
}

TEST(InvalidFieldsTest, ManyViolationsStayBounded) {
  std::vector<FieldViolation> many = Numbered(200000);
  for (std::size_t i = 0; i < 40; ++i) many[i].description = std::string(600, 'd');
  const absl::Status status = InvalidFields(many);
  const ViolationReport report = ViolationReportOf(status);
  EXPECT_THAT(report.listed, SizeIs(kMaxListedViolations));
  EXPECT_EQ(report.unlisted_count, 200000u - kMaxListedViolations);
  EXPECT_LE(status.message().size(), kMaxMessageBytes);
  EXPECT_THAT(Msg(status), EndsWith(" more invalid fields"));
  // Payload: 20 listed violations of bounded size.
  const absl::optional<absl::Cord> payload = status.GetPayload(kFieldViolationsPayload);
  ASSERT_TRUE(payload.has_value());
  EXPECT_LE(payload->size(),
            kMaxListedViolations * (kMaxFieldPathBytes + kMaxDescriptionBytes + 16) + 64);
}

TEST(InvalidFieldsTest, NewlineInAnIdCannotForgeAViolation) {
  // The old line-based payload split this description into a second,
  // forged violation named "forged.field".
  const absl::Status status = InvalidFields(
      {{"structure[1].id", "id \"a\nforged.field\tforged description\n\" is used twice"}});
  const std::vector<FieldViolation> out = FieldViolationsOf(status);
  ASSERT_THAT(out, SizeIs(1));
  EXPECT_EQ(out[0].field, "structure[1].id");
  EXPECT_EQ(out[0].description,
            "id \"a\\nforged.field\\tforged description\\n\" is used twice");
  EXPECT_THAT(Msg(status), Not(HasSubstr("\n")));
}

TEST(InvalidFieldsTest, ForgedPayloadLookalikeInAFieldStaysOneViolation) {
  const std::string lookalike = "x,5:evil!,3:bad,";
  const std::vector<FieldViolation> out =
      FieldViolationsOf(InvalidFields({{lookalike, lookalike}}));
  ASSERT_THAT(out, SizeIs(1));
  EXPECT_EQ(out[0].field, lookalike);
  EXPECT_EQ(out[0].description, lookalike);
}

TEST(InvalidFieldsTest, MalformedOrForeignPayloadGivesNoViolations) {
  absl::Status old_format = absl::InvalidArgumentError("x");
  old_format.SetPayload(kFieldViolationsPayload, absl::Cord("a\tb\nc\td\n"));
  EXPECT_THAT(FieldViolationsOf(old_format), IsEmpty());
  absl::Status truncated = InvalidFields({{"field", "description"}});
  std::string bytes(*truncated.GetPayload(kFieldViolationsPayload));
  bytes.pop_back();  // the final ','
  truncated.SetPayload(kFieldViolationsPayload, absl::Cord(bytes));
  EXPECT_THAT(FieldViolationsOf(truncated), IsEmpty());
  absl::Status odd = InvalidFields({{"field", "description"}});
  std::string odd_bytes(*odd.GetPayload(kFieldViolationsPayload));
  odd.SetPayload(kFieldViolationsPayload, absl::Cord(odd_bytes + "1:x,"));  // no description
  EXPECT_THAT(FieldViolationsOf(odd), IsEmpty());
  EXPECT_THAT(FieldViolationsOf(absl::InternalError("x")), IsEmpty());
}

TEST(SanitizeTextTest, EscapesControlCharacters) {
  EXPECT_EQ(SanitizeText("a\nb\rc\td", 100), "a\\nb\\rc\\td");
  EXPECT_EQ(SanitizeText(std::string("\x00\x01\x1f\x7f", 4), 100), "\\x00\\x01\\x1f\\x7f");
  EXPECT_EQ(SanitizeText("100% sure", 100), "100% sure");
}

TEST(SanitizeTextTest, KeepsValidUtf8AndEscapesTheRest) {
  // Source: RFC 3629 section 4 and its examples (from memory): U+00E9, U+20AC,
  // U+1F600 are well formed; C0 AF is an overlong '/', ED A0 80 a surrogate,
  // F4 90 80 80 beyond U+10FFFF, FF never appears, E2 82 is a cut sequence.
  EXPECT_EQ(SanitizeText("caf\xc3\xa9 \xe2\x82\xac \xf0\x9f\x98\x80", 100),
            "caf\xc3\xa9 \xe2\x82\xac \xf0\x9f\x98\x80");
  EXPECT_EQ(SanitizeText("\xc0\xaf", 100), "\\xc0\\xaf");
  EXPECT_EQ(SanitizeText("\xed\xa0\x80", 100), "\\xed\\xa0\\x80");
  EXPECT_EQ(SanitizeText("\xf4\x90\x80\x80", 100), "\\xf4\\x90\\x80\\x80");
  EXPECT_EQ(SanitizeText("\xff", 100), "\\xff");
  EXPECT_EQ(SanitizeText("x\xe2\x82", 100), "x\\xe2\\x82");
  // U+0085 (next line, a C1 control) and U+202E (right-to-left override)
  // are valid UTF-8 but change what a reader sees: escaped.
  EXPECT_EQ(SanitizeText("a\xc2\x85z", 100), "a\\u{85}z");
  EXPECT_EQ(SanitizeText("a\xe2\x80\xaez", 100), "a\\u{202e}z");
}

TEST(SanitizeTextTest, TruncatesAtACharacterBoundaryWithEllipsis) {
  EXPECT_EQ(SanitizeText(std::string(10, 'x'), 10), std::string(10, 'x'));
  EXPECT_EQ(SanitizeText(std::string(11, 'x'), 10), "xxxxxxx...");
  // Two-byte characters: never cut in the middle of one.
  std::string accents;
  for (int i = 0; i < 100; ++i) accents += "\xc3\xa9";
  const std::string cut = SanitizeText(accents, 10);
  EXPECT_LE(cut.size(), 10u);
  EXPECT_THAT(cut, EndsWith("..."));
  EXPECT_TRUE(WellFormedPrintable(cut)) << cut;
  // Escapes are not split either.
  EXPECT_EQ(SanitizeText(std::string(20, '\n'), 10), "\\n\\n\\n...");
}

TEST(SanitizeTextTest, IsIdempotentAndAlwaysPrintableUtf8) {
  // Brute force over every single byte and every two-byte pair, plus
  // mixtures: the output is well-formed printable UTF-8 (table walk above)
  // and a second pass leaves it unchanged.
  for (int a = 0; a < 256; ++a) {
    for (int b = 0; b < 256; ++b) {
      const std::string in = {static_cast<char>(a), static_cast<char>(b), 'z'};
      const std::string once = SanitizeText(in, 64);
      ASSERT_TRUE(WellFormedPrintable(once)) << a << " " << b;
      ASSERT_EQ(SanitizeText(once, 64), once) << a << " " << b;
    }
  }
  const std::string mixed = "\x01\xe2\x80\xae\xff%%\xc3\xa9\n\xf0\x9f\x98";
  for (std::size_t limit = 3; limit < 60; ++limit) {
    const std::string once = SanitizeText(mixed, limit);
    EXPECT_LE(once.size(), limit);
    EXPECT_TRUE(WellFormedPrintable(once)) << limit;
    EXPECT_EQ(SanitizeText(once, limit), once) << limit;
  }
}

TEST(InvalidFieldsTest, PathsAndDescriptionsAreCutToTheirBounds) {
  const absl::Status status =
      InvalidFields({{std::string(1000, 'f'), std::string(100000, 'd')}});
  const std::vector<FieldViolation> out = FieldViolationsOf(status);
  ASSERT_THAT(out, SizeIs(1));
  EXPECT_EQ(out[0].field.size(), kMaxFieldPathBytes);
  EXPECT_THAT(out[0].field, EndsWith("..."));
  EXPECT_EQ(out[0].description.size(), kMaxDescriptionBytes);
  EXPECT_THAT(out[0].description, EndsWith("..."));
  EXPECT_LE(status.message().size(), kMaxMessageBytes);
}

TEST(InvalidFieldsTest, MessageIsBoundedInEveryShape) {
  const std::vector<std::vector<FieldViolation>> cases = {
      Numbered(21, std::string(kMaxDescriptionBytes, '%')),
      Numbered(5, std::string(200, '\n')),
      {{std::string(300, '%'), std::string(300, '\xff')}},
      Numbered(40, "must be at least 1"),
  };
  for (const auto& violations : cases) {
    const absl::Status status = InvalidFields(violations);
    EXPECT_LE(status.message().size(), kMaxMessageBytes);
    EXPECT_TRUE(WellFormedPrintable(std::string(status.message())));
    EXPECT_THAT(Msg(status), StartsWith(FieldViolationsOf(status)[0].field.substr(0, 3)));
  }
  // 40 short violations: as many as fit are spelled out, the rest counted.
  const absl::Status forty = InvalidFields(Numbered(40, "must be at least 1"));
  EXPECT_THAT(Msg(forty), StartsWith("f[0]: must be at least 1; f[1]: "));
  EXPECT_THAT(Msg(forty), HasSubstr("; and "));
  EXPECT_THAT(Msg(forty), EndsWith(" more invalid fields"));
}

TEST(SizeChecksTest, ListAndTextCapsNameTheField) {
  std::vector<FieldViolation> v;
  EXPECT_TRUE(CheckListSize("structure", kMaxStructureCandidates, kMaxStructureCandidates, &v));
  EXPECT_FALSE(
      CheckListSize("structure", kMaxStructureCandidates + 1, kMaxStructureCandidates, &v));
  EXPECT_TRUE(CheckTextSize("candidate.id", std::string(kMaxIdBytes, 'i'), kMaxIdBytes, &v));
  EXPECT_FALSE(
      CheckTextSize("candidate.id", std::string(kMaxIdBytes + 1, 'i'), kMaxIdBytes, &v));
  ASSERT_THAT(v, SizeIs(2));
  EXPECT_EQ(v[0].field, "structure");
  EXPECT_EQ(v[0].description, "at most 10000 entries, got 10001");
  EXPECT_EQ(v[1].field, "candidate.id");
  EXPECT_EQ(v[1].description, "at most 256 bytes, got 257");
}

}  // namespace
}  // namespace riskbound::core
