#include "service/core/field_violation.h"

#include <cmath>

#include "absl/strings/cord.h"
#include "absl/strings/str_cat.h"
#include "absl/strings/str_join.h"
#include "absl/strings/str_split.h"

namespace riskbound::core {
namespace {

std::string Describe(double value) {
  if (std::isnan(value)) return "NaN";
  if (std::isinf(value)) return value > 0 ? "+Inf" : "-Inf";
  return absl::StrCat(value);
}

}  // namespace

absl::Status InvalidFields(const std::vector<FieldViolation>& violations) {
  if (violations.empty()) return absl::OkStatus();
  std::vector<std::string> parts;
  std::string payload;
  for (const FieldViolation& v : violations) {
    parts.push_back(absl::StrCat(v.field, ": ", v.description));
    absl::StrAppend(&payload, v.field, "\t", v.description, "\n");
  }
  absl::Status status = absl::InvalidArgumentError(absl::StrJoin(parts, "; "));
  status.SetPayload(kFieldViolationsPayload, absl::Cord(payload));
  return status;
}

std::vector<FieldViolation> FieldViolationsOf(const absl::Status& status) {
  std::vector<FieldViolation> out;
  const absl::optional<absl::Cord> payload = status.GetPayload(kFieldViolationsPayload);
  if (!payload.has_value()) return out;
  for (absl::string_view line :
       absl::StrSplit(std::string(*payload), '\n', absl::SkipEmpty())) {
    std::pair<std::string, std::string> kv = absl::StrSplit(line, absl::MaxSplits('\t', 1));
    out.push_back({kv.first, kv.second});
  }
  return out;
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

}  // namespace riskbound::core
