#include "service/rpc/refusals.h"

#include "absl/strings/match.h"
#include "absl/strings/str_cat.h"

namespace riskbound::rpc {
namespace {

// True when `path` is `parent` or a field under it ("a.b", "a.b.c", "a.b[2]").
bool AtOrUnder(absl::string_view path, absl::string_view parent) {
  if (!absl::StartsWith(path, parent)) return false;
  if (path.size() == parent.size()) return true;
  const char next = path[parent.size()];
  return next == '.' || next == '[';
}

}  // namespace

bool Refusals::RefuseList(const std::string& field, std::size_t size, std::size_t cap,
                          const std::string& skip) {
  if (size <= cap) return true;
  violations.push_back({field, absl::StrCat("at most ", cap, " entries, got ", size)});
  skipped.push_back(skip.empty() ? field : skip);
  return false;
}

bool Refusals::RefuseText(const std::string& field, absl::string_view text, std::size_t cap) {
  if (text.size() <= cap) return true;
  violations.push_back({field, absl::StrCat("at most ", cap, " bytes, got ", text.size())});
  skipped.push_back(field);
  return false;
}

absl::Status WithRefusals(const Refusals& refusals, const absl::Status& core_status) {
  core::ViolationReport found = core::ViolationReportOf(core_status);
  if (!core_status.ok() && found.listed.empty() && found.unlisted_count == 0) {
    return core_status;
  }
  std::vector<core::FieldViolation> all = refusals.violations;
  for (core::FieldViolation& v : found.listed) {
    bool skip = false;
    for (const std::string& s : refusals.skipped) skip = skip || AtOrUnder(v.field, s);
    for (const std::string& s : refusals.skipped_exact) skip = skip || v.field == s;
    if (!skip) all.push_back(std::move(v));
  }
  return core::InvalidFields(all, found.unlisted_count);
}

}  // namespace riskbound::rpc
