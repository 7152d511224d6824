// `riskbound score --report FILE`: one self-contained HTML page (inline CSS
// and SVG; no script, no network, no external font) that a person can open:
// the counts, each model's bound against the threshold, the HOLD models
// with the labels each needs, the error rows, the statement and cautions.
//
// Memory stays bounded whatever the registry size: the counts cover every
// row; the chart keeps the kChartRows models closest to the threshold (gate
// mode) or with the largest bounds (certify mode), and the tables the first
// kTableRows HOLD and error rows, each saying how many were left out.
#ifndef RISKBOUND_CLIENT_CLI_REGISTRY_REPORT_H_
#define RISKBOUND_CLIENT_CLI_REGISTRY_REPORT_H_

#include <cstdint>
#include <optional>
#include <string>
#include <vector>

#include "client_cli/registry_rows.h"
#include "riskbound/v1/registry.pb.h"

namespace riskbound::cli {

class RegistryReport {
 public:
  static constexpr std::size_t kChartRows = 300;
  static constexpr std::size_t kTableRows = 1000;

  // `max_risk`: the gate policy's threshold (gate mode), nullopt in certify
  // mode.
  explicit RegistryReport(std::optional<double> max_risk) : max_risk_(max_risk) {}

  // Counts one output row, and keeps it when the chart or a table shows it.
  void Add(const Row& row);

  // The page. `summary` is the server's RunSummary of the last part of the
  // run (statement, cautions, engine version); `title` names the input.
  std::string Render(const v1::RunSummary& summary, const std::string& title) const;

  std::uint64_t rows() const { return rows_; }
  std::uint64_t promote_count() const { return promote_; }
  std::uint64_t hold_count() const { return hold_; }
  std::uint64_t reject_count() const { return reject_; }
  std::uint64_t error_count() const { return errors_; }

 private:
  struct Point {
    std::string label;
    double upper = 0;
    std::string outcome;  // PROMOTE, HOLD, REJECT, certified, vacuous
    double key = 0;       // smaller: more worth showing
  };
  std::optional<double> max_risk_;
  std::uint64_t rows_ = 0, promote_ = 0, hold_ = 0, reject_ = 0, errors_ = 0;
  std::uint64_t certified_ = 0, vacuous_ = 0;
  std::vector<Point> chart_;  // a max-heap on key, at most kChartRows
  std::vector<Row> holds_, error_rows_;
};

}  // namespace riskbound::cli

#endif  // RISKBOUND_CLIENT_CLI_REGISTRY_REPORT_H_
