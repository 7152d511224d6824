#include "service/core/field_violation.h"

#include <algorithm>
#include <cmath>
#include <limits>

#include "absl/strings/cord.h"
#include "absl/strings/numbers.h"
#include "absl/strings/str_cat.h"
#include "absl/strings/str_format.h"
#include "absl/strings/strip.h"

namespace riskbound::core {
namespace {

constexpr absl::string_view kEllipsis = "...";
// First bytes of the payload: the encoding's name and version.
constexpr absl::string_view kPayloadMagic = "rbfv1;";

std::string Describe(double value) {
  if (std::isnan(value)) return "NaN";
  if (std::isinf(value)) return value > 0 ? "+Inf" : "-Inf";
  return absl::StrCat(value);
}

std::uint64_t SaturatingAdd(std::uint64_t a, std::uint64_t b) {
  return a > std::numeric_limits<std::uint64_t>::max() - b
             ? std::numeric_limits<std::uint64_t>::max()
             : a + b;
}

// Code points that are valid UTF-8 but would reorder or break the text a
// reader sees: C1 controls, line and paragraph separators, bidirectional
// marks, embeddings, overrides and isolates, the byte-order mark.
bool IsInvisibleControl(std::uint32_t cp) {
  return (cp >= 0x80 && cp <= 0x9F) || cp == 0x061C || cp == 0x200E || cp == 0x200F ||
         cp == 0x2028 || cp == 0x2029 || (cp >= 0x202A && cp <= 0x202E) ||
         (cp >= 0x2066 && cp <= 0x2069) || cp == 0xFEFF;
}

bool IsContinuation(unsigned char b) { return (b & 0xC0) == 0x80; }

// Length of the valid UTF-8 sequence (RFC 3629: shortest form, no
// surrogates, at most U+10FFFF) starting at text[i], and its code point; 0
// when the bytes there are not one.
std::size_t Utf8Sequence(absl::string_view text, std::size_t i, std::uint32_t* cp) {
  const auto b = [&](std::size_t k) { return static_cast<unsigned char>(text[i + k]); };
  const std::size_t left = text.size() - i;
  const unsigned char b0 = b(0);
  if (b0 >= 0xC2 && b0 <= 0xDF) {
    if (left < 2 || !IsContinuation(b(1))) return 0;
    *cp = ((b0 & 0x1Fu) << 6) | (b(1) & 0x3Fu);
    return 2;
  }
  if (b0 >= 0xE0 && b0 <= 0xEF) {
    if (left < 3 || !IsContinuation(b(1)) || !IsContinuation(b(2))) return 0;
    if (b0 == 0xE0 && b(1) < 0xA0) return 0;  // overlong
    if (b0 == 0xED && b(1) > 0x9F) return 0;  // surrogate
    *cp = ((b0 & 0x0Fu) << 12) | ((b(1) & 0x3Fu) << 6) | (b(2) & 0x3Fu);
    return 3;
  }
  if (b0 >= 0xF0 && b0 <= 0xF4) {
    if (left < 4 || !IsContinuation(b(1)) || !IsContinuation(b(2)) || !IsContinuation(b(3))) {
      return 0;
    }
    if (b0 == 0xF0 && b(1) < 0x90) return 0;  // overlong
    if (b0 == 0xF4 && b(1) > 0x8F) return 0;  // beyond U+10FFFF
    *cp = ((b0 & 0x07u) << 18) | ((b(1) & 0x3Fu) << 12) | ((b(2) & 0x3Fu) << 6) |
          (b(3) & 0x3Fu);
    return 4;
  }
  return 0;
}

// Appends one netstring: "<decimal length>:<bytes>,".
void AppendNetstring(absl::string_view s, std::string* out) {
  absl::StrAppend(out, s.size(), ":", s, ",");
}

// Reads one netstring at the front of *in; false when malformed.
bool ReadNetstring(absl::string_view* in, absl::string_view* out) {
  const std::size_t colon = in->find(':');
  if (colon == absl::string_view::npos || colon == 0 || colon > 20) return false;
  std::uint64_t length = 0;
  for (char c : in->substr(0, colon)) {
    if (c < '0' || c > '9') return false;
  }
  if (!absl::SimpleAtoi(in->substr(0, colon), &length)) return false;
  if (length > in->size() - colon - 1 || in->size() - colon - 1 - length < 1) return false;
  if ((*in)[colon + 1 + length] != ',') return false;
  *out = in->substr(colon + 1, length);
  in->remove_prefix(colon + 2 + length);
  return true;
}

std::string MoreText(std::uint64_t count) {
  return absl::StrCat(count, count == 1 ? " more invalid field" : " more invalid fields");
}

// The message: as many "field: description" as fit, then how many more.
std::string Message(const std::vector<FieldViolation>& listed, std::uint64_t total) {
  std::string message;
  std::uint64_t shown = 0;
  const auto tail = [&](std::uint64_t remaining) -> std::string {
    if (remaining == 0) return "";
    if (!message.empty()) return absl::StrCat("; and ", MoreText(remaining));
    return absl::StrCat(remaining, remaining == 1 ? " invalid field (not listed)"
                                                  : " invalid fields (not listed)");
  };
  for (const FieldViolation& v : listed) {
    const std::string part = absl::StrCat(v.field, ": ", v.description);
    const absl::string_view separator = message.empty() ? "" : "; ";
    // The tail that must still fit after this part: "; and N more ...".
    const std::size_t reserve =
        total - shown - 1 == 0 ? 0 : 6 + MoreText(total - shown - 1).size();
    if (message.size() + separator.size() + part.size() + reserve <= kMaxMessageBytes) {
      absl::StrAppend(&message, separator, part);
      ++shown;
      continue;
    }
    if (message.empty()) {
      // Not even the first fits: cut it.
      message = SanitizeText(part, kMaxMessageBytes - reserve);
      ++shown;
    }
    break;
  }
  message += tail(total - shown);
  return message;
}

}  // namespace

std::string SanitizeText(absl::string_view text, std::size_t max_bytes) {
  if (max_bytes < kEllipsis.size()) max_bytes = kEllipsis.size();
  std::string out;
  out.reserve(std::min(text.size(), max_bytes) + 8);
  // Length of `out` at the last character boundary that leaves room for
  // the ellipsis.
  std::size_t cut = 0;
  const std::size_t keep_limit = max_bytes - kEllipsis.size();
  std::size_t i = 0;
  while (i < text.size()) {
    const unsigned char c = static_cast<unsigned char>(text[i]);
    std::size_t consumed = 1;
    if (c < 0x80) {
      if (c == '\n') {
        out += "\\n";
      } else if (c == '\r') {
        out += "\\r";
      } else if (c == '\t') {
        out += "\\t";
      } else if (c < 0x20 || c == 0x7F) {
        absl::StrAppendFormat(&out, "\\x%02x", c);
      } else {
        out.push_back(static_cast<char>(c));
      }
    } else {
      std::uint32_t cp = 0;
      const std::size_t n = Utf8Sequence(text, i, &cp);
      if (n == 0) {
        absl::StrAppendFormat(&out, "\\x%02x", c);
      } else if (IsInvisibleControl(cp)) {
        absl::StrAppendFormat(&out, "\\u{%x}", cp);
        consumed = n;
      } else {
        out.append(text.data() + i, n);
        consumed = n;
      }
    }
    i += consumed;
    if (out.size() > max_bytes) {
      out.resize(cut);
      out.append(kEllipsis.data(), kEllipsis.size());
      return out;
    }
    if (out.size() <= keep_limit) cut = out.size();
  }
  return out;
}

absl::Status InvalidFields(const std::vector<FieldViolation>& violations,
                           std::uint64_t unlisted_count) {
  if (violations.empty() && unlisted_count == 0) return absl::OkStatus();
  const std::size_t listed_count = std::min(violations.size(), kMaxListedViolations);
  std::vector<FieldViolation> listed;
  listed.reserve(listed_count);
  for (std::size_t i = 0; i < listed_count; ++i) {
    listed.push_back({SanitizeText(violations[i].field, kMaxFieldPathBytes),
                      SanitizeText(violations[i].description, kMaxDescriptionBytes)});
  }
  std::uint64_t unlisted = SaturatingAdd(violations.size() - listed_count, unlisted_count);
  for (const FieldViolation& v : violations) unlisted = SaturatingAdd(unlisted, v.also_counts);
  std::string payload(kPayloadMagic);
  AppendNetstring(absl::StrCat(unlisted), &payload);
  for (const FieldViolation& v : listed) {
    AppendNetstring(v.field, &payload);
    AppendNetstring(v.description, &payload);
  }
  absl::Status status =
      absl::InvalidArgumentError(Message(listed, SaturatingAdd(listed_count, unlisted)));
  status.SetPayload(kFieldViolationsPayload, absl::Cord(payload));
  return status;
}

ViolationReport ViolationReportOf(const absl::Status& status) {
  ViolationReport report;
  const absl::optional<absl::Cord> payload = status.GetPayload(kFieldViolationsPayload);
  if (!payload.has_value()) return report;
  const std::string bytes(*payload);
  absl::string_view in = bytes;
  if (!absl::ConsumePrefix(&in, kPayloadMagic)) return report;
  absl::string_view count;
  std::uint64_t unlisted = 0;
  if (!ReadNetstring(&in, &count) || !absl::SimpleAtoi(count, &unlisted)) return report;
  std::vector<FieldViolation> listed;
  while (!in.empty()) {
    absl::string_view field;
    absl::string_view description;
    if (!ReadNetstring(&in, &field) || !ReadNetstring(&in, &description)) return report;
    listed.push_back({std::string(field), std::string(description)});
  }
  report.listed = std::move(listed);
  report.unlisted_count = unlisted;
  return report;
}

FieldViolation SummaryViolation(std::uint64_t unlisted_count) {
  return {kSummaryField,
          absl::StrCat("and ", unlisted_count,
                       unlisted_count == 1 ? " more invalid field was not listed"
                                           : " more invalid fields were not listed")};
}

std::vector<FieldViolation> FieldViolationsOf(const absl::Status& status) {
  ViolationReport report = ViolationReportOf(status);
  if (report.unlisted_count > 0) report.listed.push_back(SummaryViolation(report.unlisted_count));
  return std::move(report.listed);
}

bool CheckProbabilityOpen(const std::string& field, double value,
                          std::vector<FieldViolation>* out) {
  if (std::isfinite(value) && value > 0.0 && value < 1.0) return true;
  out->push_back({field, absl::StrCat("must be a probability strictly between 0 and 1, got ",
                                      Describe(value))});
  return false;
}

bool CheckProbabilityClosed(const std::string& field, double value,
                            std::vector<FieldViolation>* out) {
  if (std::isfinite(value) && value >= 0.0 && value <= 1.0) return true;
  out->push_back(
      {field, absl::StrCat("must be a probability in [0, 1], got ", Describe(value))});
  return false;
}

bool CheckNonNegativeFinite(const std::string& field, double value,
                            std::vector<FieldViolation>* out) {
  if (std::isfinite(value) && value >= 0.0) return true;
  out->push_back(
      {field, absl::StrCat("must be a finite number >= 0, got ", Describe(value))});
  return false;
}

bool CheckListSize(const std::string& field, std::size_t size, std::size_t max_entries,
                   std::vector<FieldViolation>* out) {
  if (size <= max_entries) return true;
  out->push_back({field, absl::StrCat("at most ", max_entries, " entries, got ", size)});
  return false;
}

bool CheckTextSize(const std::string& field, absl::string_view text, std::size_t max_bytes,
                   std::vector<FieldViolation>* out) {
  if (text.size() <= max_bytes) return true;
  out->push_back({field, absl::StrCat("at most ", max_bytes, " bytes, got ", text.size())});
  return false;
}

}  // namespace riskbound::core
