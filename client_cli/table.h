// Plain-text tables for people: left-aligned columns separated by two spaces.
// Numbers in them come from format.h (outward rounding).
#ifndef RISKBOUND_CLIENT_CLI_TABLE_H_
#define RISKBOUND_CLIENT_CLI_TABLE_H_

#include <string>
#include <vector>

namespace riskbound::cli {

class Table {
 public:
  explicit Table(std::vector<std::string> header) : header_(std::move(header)) {}
  // REQUIRES: cells.size() == header size.
  void AddRow(std::vector<std::string> cells) { rows_.push_back(std::move(cells)); }
  // Returns the table, one line per row, header first.
  std::string Render() const;

 private:
  std::vector<std::string> header_;
  std::vector<std::vector<std::string>> rows_;
};


}  // namespace riskbound::cli

#endif  // RISKBOUND_CLIENT_CLI_TABLE_H_
