// `riskbound score` rows with slices: the CSV columns worst_slice_name,
// worst_slice_upper_bound, exceeding_slice_count and undecided_slice_count
// are read from the answer, and a row read back for --resume (RowFromText)
// gives the same cells again (a brute-force round trip over every outcome
// mix of a small gate answer).
#include "client_cli/registry_rows.h"

#include <algorithm>
#include <optional>
#include <string>
#include <vector>

#include "absl/strings/str_cat.h"
#include "gtest/gtest.h"

namespace riskbound::cli {
namespace {

std::vector<std::string> Cells(const std::string& text) {
  std::string line = text;
  if (!line.empty() && line.back() == '\n') line.pop_back();
  auto cells = SplitCsvLine(line);
  EXPECT_TRUE(cells.ok()) << cells.status();
  return cells.ok() ? *cells : std::vector<std::string>{};
}

std::vector<std::string> Header() { return Cells(CsvHeader()); }

std::string Cell(const std::string& row_text, const std::string& column) {
  const std::vector<std::string> header = Header();
  const std::vector<std::string> cells = Cells(row_text);
  EXPECT_EQ(header.size(), cells.size());
  for (std::size_t i = 0; i < header.size() && i < cells.size(); ++i) {
    if (header[i] == column) return cells[i];
  }
  ADD_FAILURE() << "no column " << column;
  return "";
}

// The row read back from its CSV text (RowFromText, as --resume does)
// writes the same text again; returns what was read back.
std::optional<Row> ExpectRoundTrip(const std::string& text) {
  std::optional<Row> back = RowFromText(text.substr(0, text.size() - 1), OutputFormat::kCsv);
  EXPECT_TRUE(back.has_value()) << text;
  if (back.has_value()) {
    EXPECT_EQ(RowText(*back, OutputFormat::kCsv), text);
  }
  return back;
}

Row GateRow(const std::vector<v1::SliceOutcome>& outcomes) {
  Row row;
  row.line = 7;
  row.result.set_record_id("r-7");
  row.result.set_model_name("late-risk");
  v1::GateResponse* g = row.result.mutable_gated();
  g->set_verdict(v1::VERDICT_HOLD);
  g->mutable_risk_certificate()->set_risk_upper_bound(0.04);
  g->mutable_risk_certificate()->set_family_name("holdout-binomial");
  for (std::size_t i = 0; i < outcomes.size(); ++i) {
    v1::SliceCheck* c = g->add_slices();
    c->set_slice_name(absl::StrCat("depot ", i, i == 1 ? ", \"quoted\"" : ""));
    c->set_outcome(outcomes[i]);
    // Not sorted: the digest finds the largest itself.
    c->set_risk_upper_bound(0.01 * static_cast<double>((i * 5 + 3) % outcomes.size() + 1));
  }
  return row;
}

TEST(RegistryRowsTest, HeaderHasTheSliceColumnsOnce) {
  const std::vector<std::string> header = Header();
  for (const char* column : {"worst_slice_name", "worst_slice_upper_bound",
                             "exceeding_slice_count", "undecided_slice_count"}) {
    EXPECT_EQ(std::count(header.begin(), header.end(), column), 1) << column;
  }
}

TEST(RegistryRowsTest, GateRowNamesTheWorstSliceAndCountsOutcomes) {
  const Row row = GateRow({v1::SLICE_OUTCOME_CLEARS, v1::SLICE_OUTCOME_EXCEEDS,
                           v1::SLICE_OUTCOME_UNDECIDED, v1::SLICE_OUTCOME_UNDECIDED});
  const std::string text = RowText(row, OutputFormat::kCsv);
  // Upper bounds 0.04, 0.01, 0.02, 0.03 for slices 0..3 ((i*5+3) % 4 + 1).
  EXPECT_EQ(Cell(text, "worst_slice_name"), "depot 0");
  EXPECT_EQ(Cell(text, "worst_slice_upper_bound"), "0.04");
  EXPECT_EQ(Cell(text, "exceeding_slice_count"), "1");
  EXPECT_EQ(Cell(text, "undecided_slice_count"), "2");
  const SliceDigest d = DigestSlices(row.result);
  EXPECT_EQ(d.slice_count, 4u);
  EXPECT_EQ(d.exceeding, std::vector<std::string>{"depot 1, \"quoted\""});
  EXPECT_EQ(d.undecided, (std::vector<std::string>{"depot 2", "depot 3"}));
}

TEST(RegistryRowsTest, RowsWithoutSlicesLeaveTheColumnsEmpty) {
  const std::string text = RowText(GateRow({}), OutputFormat::kCsv);
  for (const char* column : {"worst_slice_name", "worst_slice_upper_bound",
                             "exceeding_slice_count", "undecided_slice_count"}) {
    EXPECT_EQ(Cell(text, column), "") << column;
  }
  EXPECT_EQ(DigestSlices(GateRow({}).result).slice_count, 0u);
}

// Every mix of outcomes over 1 to 4 slices (3^G answers each): the row read
// back from its CSV text writes the same text again.
TEST(RegistryRowsTest, GateRowsRoundTripThroughResume) {
  const v1::SliceOutcome kinds[] = {v1::SLICE_OUTCOME_CLEARS, v1::SLICE_OUTCOME_EXCEEDS,
                                    v1::SLICE_OUTCOME_UNDECIDED};
  int checked = 0;
  for (int g = 1; g <= 4; ++g) {
    int combos = 1;
    for (int i = 0; i < g; ++i) combos *= 3;
    for (int code = 0; code < combos; ++code) {
      std::vector<v1::SliceOutcome> outcomes;
      for (int i = 0, c = code; i < g; ++i, c /= 3) outcomes.push_back(kinds[c % 3]);
      const std::string text = RowText(GateRow(outcomes), OutputFormat::kCsv);
      const std::optional<Row> back = ExpectRoundTrip(text);
      ASSERT_TRUE(back.has_value()) << text;
      const SliceDigest a = DigestSlices(GateRow(outcomes).result);
      const SliceDigest b = DigestSlices(back->result);
      EXPECT_EQ(a.exceeding.size(), b.exceeding.size()) << text;
      EXPECT_EQ(a.undecided.size(), b.undecided.size()) << text;
      EXPECT_EQ(a.worst_slice_name, b.worst_slice_name) << text;
      ++checked;
    }
  }
  EXPECT_EQ(checked, 3 + 9 + 27 + 81);
}

TEST(RegistryRowsTest, CertifiedRowWithSlicesRoundTrips) {
  Row row;
  row.line = 3;
  row.result.set_record_id("r-3");
  row.result.set_failure_probability(0.05);
  v1::CertifyResponse* c = row.result.mutable_certified();
  c->mutable_tightest()->set_risk_upper_bound(0.035);
  c->mutable_tightest()->set_family_name("holdout-binomial");
  v1::SliceSummary* s = c->mutable_slices();
  s->add_slice_certificates();
  s->add_slice_certificates();
  s->set_worst_slice_name("harbour-quay");
  s->set_worst_slice_upper_bound(0.1207);
  const std::string text = RowText(row, OutputFormat::kCsv);
  EXPECT_EQ(Cell(text, "worst_slice_name"), "harbour-quay");
  EXPECT_EQ(Cell(text, "worst_slice_upper_bound"), "0.1207");
  // Counts of slice outcomes belong to gate rows only.
  EXPECT_EQ(Cell(text, "exceeding_slice_count"), "");
  ExpectRoundTrip(text);
}

TEST(RegistryRowsTest, ErrorRowsKeepTheirColumns) {
  Row row;
  row.line = 9;
  row.result.set_record_id("r-9");
  row.result.mutable_error()->set_code("INVALID_ARGUMENT");
  row.result.mutable_error()->set_message("bad");
  row.result.mutable_error()->add_field_violations()->set_field("evidence.holdout.error_count");
  const std::string text = RowText(row, OutputFormat::kCsv);
  EXPECT_EQ(Cell(text, "error_code"), "INVALID_ARGUMENT");
  EXPECT_EQ(Cell(text, "error_fields"), "evidence.holdout.error_count");
  EXPECT_EQ(Cell(text, "error_message"), "bad");
  ExpectRoundTrip(text);
}

}  // namespace
}  // namespace riskbound::cli
