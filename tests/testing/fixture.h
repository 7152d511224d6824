// Reading the checked-in reference fixtures (CSV written by
// tests/reference/gen_fixtures.py with scipy).
#ifndef RISKBOUND_TESTS_TESTING_FIXTURE_H_
#define RISKBOUND_TESTS_TESTING_FIXTURE_H_

#include <fstream>
#include <map>
#include <sstream>
#include <stdexcept>
#include <string>
#include <vector>

namespace riskbound::testing {

// One data row: column name -> text value.
using FixtureRow = std::map<std::string, std::string>;

// ReadFixture
// Reads RISKBOUND_FIXTURE_DIR/<name>. Lines starting with '#' are comments
// (the generator writes its scipy version there); the first other line is the
// header. Throws std::runtime_error when the file is missing or empty, so a
// test cannot pass on no data.
inline std::vector<FixtureRow> ReadFixture(const std::string& name) {
  const std::string path = std::string(RISKBOUND_FIXTURE_DIR) + "/" + name;
  std::ifstream in(path);
  if (!in) throw std::runtime_error("missing fixture " + path);
  std::vector<std::string> header;
  std::vector<FixtureRow> rows;
  std::string line;
  while (std::getline(in, line)) {
    if (line.empty() || line[0] == '#') continue;
    std::vector<std::string> cells;
    std::stringstream ss(line);
    std::string cell;
    while (std::getline(ss, cell, ',')) cells.push_back(cell);
    if (line.back() == ',') cells.push_back("");  // an empty last cell
    if (header.empty()) {
      header = cells;
      continue;
    }
    FixtureRow row;
    for (size_t i = 0; i < header.size() && i < cells.size(); ++i) row[header[i]] = cells[i];
    rows.push_back(row);
  }
  if (rows.empty()) throw std::runtime_error("empty fixture " + path);
  return rows;
}

inline double Num(const FixtureRow& row, const std::string& key) {
  return std::stod(row.at(key));
}

}  // namespace riskbound::testing

#endif  // RISKBOUND_TESTS_TESTING_FIXTURE_H_
