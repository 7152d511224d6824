#include "client_cli/registry_report.h"

#include <algorithm>
#include <cmath>

#include "absl/strings/str_cat.h"
#include "absl/strings/str_format.h"
#include "client_cli/format.h"
#include "client_cli/svg_plot.h"

namespace riskbound::cli {
namespace {

bool KeyLess(double a, double b) { return a < b; }

std::string LabelOf(const Row& row) {
  std::string label = row.result.record_id();
  if (!row.result.model_name().empty()) {
    absl::StrAppend(&label, " (", row.result.model_name());
    if (!row.result.model_version().empty())
      absl::StrAppend(&label, " ", row.result.model_version());
    label += ")";
  }
  if (label.size() > 48) label = label.substr(0, 45) + "...";
  return label;
}

// The undecided slices of a HOLD row: up to five names, or only how many
// where the row was read back from CSV output (which keeps only counts).
std::string UndecidedSlices(const v1::RecordResult& result) {
  constexpr std::size_t kShown = 5;
  const SliceDigest d = DigestSlices(result);
  if (d.undecided.empty()) return "";
  const bool named = std::none_of(d.undecided.begin(), d.undecided.end(),
                                  [](const std::string& n) { return n.empty(); });
  if (!named) return absl::StrCat(d.undecided.size());
  return FirstNames(d.undecided, kShown);
}

const char* ColorOf(const std::string& outcome) {
  if (outcome == "PROMOTE") return "#2e7d32";
  if (outcome == "HOLD") return "#b26a00";
  if (outcome == "REJECT") return "#c62828";
  if (outcome == "vacuous") return "#757575";
  return "#1565c0";
}

}  // namespace

void RegistryReport::Add(const Row& row) {
  ++rows_;
  const v1::RecordResult& r = row.result;
  Point p;
  p.label = LabelOf(row);
  if (r.has_gated()) {
    const v1::GateResponse& g = r.gated();
    p.upper = g.risk_certificate().risk_upper_bound();
    switch (g.verdict()) {
      case v1::VERDICT_PROMOTE:
        ++promote_;
        p.outcome = "PROMOTE";
        break;
      case v1::VERDICT_HOLD:
        ++hold_;
        p.outcome = "HOLD";
        if (holds_.size() < kTableRows) holds_.push_back(row);
        break;
      case v1::VERDICT_REJECT:
        ++reject_;
        p.outcome = "REJECT";
        break;
      default: p.outcome = "certified"; break;
    }
  } else if (r.has_certified()) {
    p.upper = r.certified().tightest().risk_upper_bound();
    const bool vacuous = r.certified().tightest().vacuous();
    ++(vacuous ? vacuous_ : certified_);
    p.outcome = vacuous ? "vacuous" : "certified";
  } else {
    ++errors_;
    if (error_rows_.size() < kTableRows) error_rows_.push_back(row);
    return;
  }
  // Gate mode: the models closest to the threshold; certify mode: the
  // largest bounds.
  p.key = max_risk_.has_value() ? std::fabs(p.upper - *max_risk_) : -p.upper;
  auto by_key = [](const Point& a, const Point& b) { return KeyLess(a.key, b.key); };
  if (chart_.size() < kChartRows) {
    chart_.push_back(std::move(p));
    std::push_heap(chart_.begin(), chart_.end(), by_key);
  } else if (p.key < chart_.front().key) {
    std::pop_heap(chart_.begin(), chart_.end(), by_key);
    chart_.back() = std::move(p);
    std::push_heap(chart_.begin(), chart_.end(), by_key);
  }
}

std::string RegistryReport::Render(const v1::RunSummary& summary, const std::string& title) const {
  std::vector<Point> points = chart_;
  std::sort(points.begin(), points.end(),
            [](const Point& a, const Point& b) { return a.upper > b.upper; });
  std::string html;
  absl::StrAppend(
      &html,
      "<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n"
      "<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">\n"
      "<title>riskbound registry report: ",
      EscapeMarkup(title),
      "</title>\n<style>\n"
      "body{font-family:sans-serif;margin:2em;max-width:960px;color:#212121}\n"
      "table{border-collapse:collapse;margin:1em 0}\n"
      "td,th{border:1px solid #bdbdbd;padding:3px 8px;text-align:left;font-size:14px}\n"
      "th{background:#eeeeee}\n.num{text-align:right;font-variant-numeric:tabular-nums}\n"
      ".note{color:#616161;font-size:13px}\n"
      "</style>\n</head>\n<body>\n"
      "<h1>Registry scoring report</h1>\n<p class=\"note\">Input: ",
      EscapeMarkup(title), ". Engine ", EscapeMarkup(summary.engine_version()), ".</p>\n");

  // Counts.
  absl::StrAppend(&html,
                  "<h2>Counts</h2>\n<table id=\"counts\">\n<tr><th>rows</th><td class=\"num\" "
                  "id=\"count-rows\">",
                  rows_, "</td></tr>\n");
  if (max_risk_.has_value()) {
    absl::StrAppend(&html, "<tr><th>PROMOTE</th><td class=\"num\" id=\"count-promote\">", promote_,
                    "</td></tr>\n<tr><th>HOLD</th><td class=\"num\" id=\"count-hold\">", hold_,
                    "</td></tr>\n<tr><th>REJECT</th><td class=\"num\" id=\"count-reject\">",
                    reject_, "</td></tr>\n");
  } else {
    absl::StrAppend(&html,
                    "<tr><th>certified (non-vacuous)</th><td class=\"num\" "
                    "id=\"count-certified\">",
                    certified_,
                    "</td></tr>\n<tr><th>vacuous</th><td class=\"num\" id=\"count-vacuous\">",
                    vacuous_, "</td></tr>\n");
  }
  absl::StrAppend(&html, "<tr><th>errors</th><td class=\"num\" id=\"count-errors\">", errors_,
                  "</td></tr>\n</table>\n");

  // Chart: one horizontal bar per model, the threshold as a vertical line.
  absl::StrAppend(&html, "<h2>Upper bound on each model's true error</h2>\n");
  const std::uint64_t scored = promote_ + hold_ + reject_ + certified_ + vacuous_;
  if (points.empty()) {
    html += "<p>No model was scored.</p>\n";
  } else {
    double top = max_risk_.value_or(0.0);
    for (const Point& p : points) top = std::max(top, p.upper);
    top = std::min(1.0, top * 1.1 + 1e-9);
    const int left = 330, width = 440, row_h = 16,
              height = 40 + row_h * static_cast<int>(points.size());
    auto x_of = [&](double v) { return left + width * std::min(1.0, std::max(0.0, v / top)); };
    absl::StrAppend(&html, "<p class=\"note\">",
                    max_risk_.has_value()
                        ? absl::StrCat("Sorted by bound; the vertical line is max_risk ",
                                       FormatObserved(*max_risk_), ".")
                        : std::string("Sorted by bound (certify mode: no threshold)."),
                    points.size() < scored
                        ? absl::StrCat(" Showing the ", points.size(), " of ", scored,
                                       max_risk_.has_value() ? " models closest to the line."
                                                             : " models with the largest bounds.")
                        : std::string(""),
                    " Bounds are rounded up. Colours: green PROMOTE, amber HOLD, red REJECT, "
                    "blue certified, grey vacuous.</p>\n");
    absl::StrAppend(&html, "<svg id=\"chart\" xmlns=\"http://www.w3.org/2000/svg\" width=\"",
                    left + width + 90, "\" height=\"", height,
                    "\" role=\"img\" "
                    "aria-label=\"upper bounds\">\n");
    for (std::size_t i = 0; i < points.size(); ++i) {
      const Point& p = points[i];
      const int y = 20 + row_h * static_cast<int>(i);
      absl::StrAppendFormat(&html,
                            "<text x=\"%d\" y=\"%d\" font-size=\"11\" text-anchor=\"end\">%s</text>"
                            "<rect x=\"%d\" y=\"%d\" width=\"%.1f\" height=\"%d\" fill=\"%s\">"
                            "<title>%s: %s (%s)</title></rect>"
                            "<text x=\"%.1f\" y=\"%d\" font-size=\"10\">%s</text>\n",
                            left - 6, y + 11, EscapeMarkup(p.label), left, y + 2,
                            x_of(p.upper) - left, row_h - 4, ColorOf(p.outcome),
                            EscapeMarkup(p.label), FormatUpper(p.upper), p.outcome, x_of(p.upper) + 4,
                            y + 11, FormatUpper(p.upper));
    }
    if (max_risk_.has_value()) {
      const double x = x_of(*max_risk_);
      absl::StrAppendFormat(&html,
                            "<line x1=\"%.1f\" y1=\"10\" x2=\"%.1f\" y2=\"%d\" stroke=\"#000\" "
                            "stroke-dasharray=\"4 3\"/><text x=\"%.1f\" y=\"10\" "
                            "font-size=\"11\">max_risk</text>\n",
                            x, x, height - 10, x + 3);
    }
    html += "</svg>\n";
  }

  // HOLD models.
  if (max_risk_.has_value()) {
    absl::StrAppend(&html, "<h2>HOLD: more labelled hold-out samples needed</h2>\n");
    if (holds_.empty()) {
      html += "<p>None.</p>\n";
    } else {
      html +=
          "<table id=\"holds\">\n<tr><th>line</th><th>model</th><th>upper bound</th>"
          "<th>extra labelled samples</th><th>undecided slices</th></tr>\n";
      for (const Row& row : holds_) {
        const v1::GateResponse& g = row.result.gated();
        absl::StrAppend(&html, "<tr><td class=\"num\">", row.line, "</td><td>",
                        EscapeMarkup(LabelOf(row)), "</td><td class=\"num\">",
                        FormatUpper(g.risk_certificate().risk_upper_bound()),
                        "</td><td class=\"num\">",
                        g.has_additional_sample_count() ? absl::StrCat(g.additional_sample_count())
                                                        : std::string("no plan"),
                        "</td><td>", EscapeMarkup(UndecidedSlices(row.result)), "</td></tr>\n");
      }
      html += "</table>\n";
      if (hold_ > holds_.size()) {
        absl::StrAppend(&html, "<p class=\"note\">", hold_ - holds_.size(),
                        " more HOLD rows are in the output file.</p>\n");
      }
    }
  }

  // Error rows.
  absl::StrAppend(&html, "<h2>Rows that could not be scored</h2>\n");
  if (error_rows_.empty()) {
    html += "<p>None.</p>\n";
  } else {
    html +=
        "<table id=\"errors\">\n<tr><th>line</th><th>record</th><th>code</th>"
        "<th>fields</th><th>message</th></tr>\n";
    for (const Row& row : error_rows_) {
      std::string fields;
      for (const auto& v : row.result.error().field_violations()) {
        if (!fields.empty()) fields += ", ";
        fields += v.field();
      }
      absl::StrAppend(&html, "<tr><td class=\"num\">", row.line, "</td><td>",
                      EscapeMarkup(LabelOf(row)), "</td><td>", EscapeMarkup(row.result.error().code()),
                      "</td><td>", EscapeMarkup(fields), "</td><td>",
                      EscapeMarkup(row.result.error().message()), "</td></tr>\n");
    }
    html += "</table>\n";
    if (errors_ > error_rows_.size()) {
      absl::StrAppend(&html, "<p class=\"note\">", errors_ - error_rows_.size(),
                      " more error rows are in the output file.</p>\n");
    }
  }

  absl::StrAppend(&html, "<h2>What holds</h2>\n<p id=\"statement\">",
                  EscapeMarkup(summary.statement()), "</p>\n<h2>Cautions</h2>\n<ul>\n");
  for (const std::string& c : summary.cautions()) {
    absl::StrAppend(&html, "<li>", EscapeMarkup(c), "</li>\n");
  }
  html += "</ul>\n</body>\n</html>\n";
  return html;
}

}  // namespace riskbound::cli
