// Plain-text tables for people: left-aligned columns separated by two spaces.
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

// FormatProbability
// Six decimals ("0.009936"); values below 1e-6 but above 0 in scientific
// notation so they do not print as zero.
std::string FormatProbability(double p);

}  // namespace riskbound::cli

#endif  // RISKBOUND_CLIENT_CLI_TABLE_H_
