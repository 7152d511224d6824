#include "client_cli/table.h"

#include <algorithm>

#include "absl/strings/str_format.h"

namespace riskbound::cli {

std::string Table::Render() const {
  std::vector<std::size_t> width(header_.size(), 0);
  auto measure = [&](const std::vector<std::string>& row) {
    for (std::size_t i = 0; i < row.size() && i < width.size(); ++i) {
      width[i] = std::max(width[i], row[i].size());
    }
  };
  measure(header_);
  for (const auto& row : rows_) measure(row);
  std::string out;
  auto emit = [&](const std::vector<std::string>& row) {
    std::string line;
    for (std::size_t i = 0; i < row.size() && i < width.size(); ++i) {
      if (i + 1 == row.size()) {
        line += row[i];
      } else {
        line += absl::StrFormat("%-*s  ", static_cast<int>(width[i]), row[i]);
      }
    }
    out += line + "\n";
  };
  emit(header_);
  for (const auto& row : rows_) emit(row);
  return out;
}


}  // namespace riskbound::cli
