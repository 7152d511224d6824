// Reading a slices file (`--slices FILE` of certify and gate): per-slice
// hold-out counts, and optionally a per-slice limit for the gate.
//
// Two forms, told apart by the first character that is not white space:
//   - CSV ('[' or '{' not first): a header row naming the columns by their
//     proto field names, `name,error_count,sample_count` in any order, and an
//     optional `max_risk` column (SliceMaxRisk.max_risk; an empty cell: no
//     per-slice limit). lowerCamelCase names (errorCount) are accepted too.
//   - JSON: an array of objects with the same keys, an object
//     {"slices": [...]}, or JSON lines (one object per line). Counts are
//     numbers or decimal strings (the protobuf JSON mapping of uint64);
//     max_risk a number, or null for no limit.
// Every bad row is an error naming the source, its line and its column; no
// row is ever dropped. Blank lines are not rows; a leading UTF-8 byte order
// mark is skipped.
#ifndef RISKBOUND_CLIENT_CLI_SLICES_FILE_H_
#define RISKBOUND_CLIENT_CLI_SLICES_FILE_H_

#include <optional>
#include <string>
#include <vector>

#include "absl/status/statusor.h"
#include "absl/strings/string_view.h"
#include "riskbound/v1/common.pb.h"
#include "riskbound/v1/gate.pb.h"

namespace riskbound::cli {

struct SlicesFile {
  // In the file's order.
  std::vector<v1::SliceEvidence> slices;
  // The rows that gave a max_risk, in the file's order.
  std::vector<v1::SliceMaxRisk> max_risks;
  // The file has a max_risk column (CSV) or key (JSON), even if every cell
  // is empty.
  bool has_max_risk = false;
};

// ParseSlices
// Reads `text` (either form above). `source` names the file in errors.
// INVALID_ARGUMENT "<source>, line L, column C (<column name>): <what>" for a
// cell that does not parse, a missing or unknown column, a row with the
// wrong number of cells, an empty or repeated name, error_count above
// sample_count, a max_risk outside (0, 1), or a file without slices.
absl::StatusOr<SlicesFile> ParseSlices(const std::string& text, const std::string& source);

// ReadSlicesFile
// ParseSlices on the content of `path` (- for stdin).
absl::StatusOr<SlicesFile> ReadSlicesFile(const std::string& path);

// SliceShareRuleFromName
// "bonferroni" or "sidak" (any case; also the enum names
// SLICE_SHARE_RULE_SIDAK, with or without the prefix), or nullopt.
std::optional<v1::SliceShareRule> SliceShareRuleFromName(absl::string_view name);

// SliceShareRuleWord
// "bonferroni" or "sidak" ("bonferroni" for UNSPECIFIED, the API's default).
std::string SliceShareRuleWord(v1::SliceShareRule rule);

}  // namespace riskbound::cli

#endif  // RISKBOUND_CLIENT_CLI_SLICES_FILE_H_
