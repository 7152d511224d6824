// The rows of `riskbound score`: reading a registry export (JSON lines or
// CSV) into riskbound.v1.RegistryRecord messages, and writing one output row
// per input row (JSON lines, CSV or a table).
#ifndef RISKBOUND_CLIENT_CLI_REGISTRY_ROWS_H_
#define RISKBOUND_CLIENT_CLI_REGISTRY_ROWS_H_

#include <cstdint>
#include <optional>
#include <string>
#include <vector>

#include "absl/status/status.h"
#include "absl/status/statusor.h"
#include "google/protobuf/descriptor.h"
#include "riskbound/v1/registry.pb.h"

namespace riskbound::cli {

enum class InputFormat { kJsonLines, kCsv };
enum class OutputFormat { kTable, kJsonLines, kCsv };

// SplitCsvLine
// The cells of one CSV line (RFC 4180: comma-separated, a cell in double
// quotes may hold commas and "" for a quote; no line breaks inside a cell).
// INVALID_ARGUMENT for an unterminated quote or text after a closing quote.
// With `starts`, also each cell's 0-based offset in the line (its opening
// quote, if quoted), one per cell.
absl::StatusOr<std::vector<std::string>> SplitCsvLine(const std::string& line,
                                                      std::vector<std::size_t>* starts = nullptr);

// CsvColumns
// The columns of a CSV header, each the path of a singular scalar field of
// riskbound.v1.RegistryRecord ("record_id", "evidence.holdout.error_count",
// "evidence.training.capacity.vc_dimension", "champion.paired.sample_count").
// INVALID_ARGUMENT naming the first column that is no such field, or a
// repeated column.
class CsvColumns {
 public:
  static absl::StatusOr<CsvColumns> FromHeader(const std::string& header_line);

  // Fills `record` from one data line. INVALID_ARGUMENT naming the column
  // and its line (`line_number`) when a cell does not parse or the line has
  // the wrong number of cells. Empty cells leave their field unset.
  absl::Status Fill(const std::string& line, std::uint64_t line_number,
                    v1::RegistryRecord* record) const;

  const std::vector<std::string>& names() const { return names_; }

 private:
  std::vector<std::string> names_;
  std::vector<std::vector<const google::protobuf::FieldDescriptor*>> paths_;
};

// ParseJsonLine
// One JSON-lines row into `record` (protobuf JSON mapping; family and model
// kind also in their CLI words). INVALID_ARGUMENT naming the line.
absl::Status ParseJsonLine(const std::string& line, std::uint64_t line_number,
                           v1::RegistryRecord* record);

// A finished row: the input line it answers and the result (the server's,
// or a local error for a line that did not parse).
struct Row {
  std::uint64_t line = 0;
  v1::RecordResult result;
};

// SliceDigest
// What a row says about its slices (evidence.slices), for the CSV columns,
// the table and the HTML report: the slice with the largest upper bound,
// and, for a gate, the slices that exceed their limit and those undecided,
// in the answer's order (worst first). Empty when the row has no slices.
struct SliceDigest {
  std::size_t slice_count = 0;
  std::string worst_slice_name;
  double worst_slice_upper_bound = 0.0;
  std::vector<std::string> exceeding;
  std::vector<std::string> undecided;
};
SliceDigest DigestSlices(const v1::RecordResult& result);

// FirstNames
// "a", "a, b, c" or "a, b, c and 4 more": the first `shown` names.
std::string FirstNames(const std::vector<std::string>& names, std::size_t shown);

// LocalErrorRow
// The row of an input line that could not be read into a record.
Row LocalErrorRow(std::uint64_t line, const std::string& record_id, const absl::Status& status);

// RowText
// The row in `format` (kJsonLines or kCsv), ending in a newline. Rows carry
// no timestamp (the gate's audit timestamp is dropped), so a re-run or a
// resumed run writes the same bytes.
std::string RowText(const Row& row, OutputFormat format);

// CsvHeader
// The header line of CSV output, ending in a newline.
std::string CsvHeader();

// RowFromText
// Reads back a row RowText wrote (for --resume). nullopt when `text` is not
// such a row.
std::optional<Row> RowFromText(const std::string& text, OutputFormat format);

}  // namespace riskbound::cli

#endif  // RISKBOUND_CLIENT_CLI_REGISTRY_ROWS_H_
