// A self-contained SVG picture of a structural-risk-minimization answer: the
// empirical risk, the capacity penalty and the bound of every candidate
// against its capacity, with the chosen candidate marked. Written by hand (no
// plotting library); any browser or image viewer opens it.
#ifndef RISKBOUND_CLIENT_CLI_SVG_PLOT_H_
#define RISKBOUND_CLIENT_CLI_SVG_PLOT_H_

#include <cstddef>
#include <string>
#include <vector>

namespace riskbound::cli {

// One candidate of the structure.
struct SrmPoint {
  std::string id;
  // Capacity (VC dimension, or ln |H|); finite, >= 0.
  double capacity = 0.0;
  // Risks in [0, 1].
  double empirical_risk = 0.0;
  double penalty = 0.0;
  double upper_bound = 0.0;
};

struct SrmPlot {
  // Heading line, e.g. "Structural risk minimization: vc-additive".
  std::string title;
  // Second heading line (the delta accounting, the choice), may be empty.
  std::string subtitle;
  // Axis label of the capacity, e.g. "capacity: VC dimension h".
  std::string capacity_label;
  // The candidates, in structure order (non-decreasing capacity).
  std::vector<SrmPoint> points;
  // Index into points of the chosen candidate.
  std::size_t chosen_index = 0;
  // True when the choice is fragile; the picture then says so.
  bool fragile = false;
  // True for select's heuristic mode: the top curve is a heuristic score, not
  // a bound, and the legend says so.
  bool heuristic = false;
};

// RenderSrmSvg
// Returns a complete SVG 1.1 document (UTF-8, with an XML declaration): axes
// with ticks and labels, light grid lines, exactly three <polyline> elements
// (classes "curve-empirical", "curve-penalty", "curve-bound"), a circle per
// point, a ring with id "chosen-marker" around the chosen candidate's bound,
// a legend and a title. The capacity axis is logarithmic when every capacity
// is > 0 and the largest is at least 10 times the smallest (the label then
// says "log scale"), linear otherwise. Ids are XML-escaped.
// REQUIRES: points non-empty, chosen_index < points.size(), finite values.
// Thread-safe; no shared state.
std::string RenderSrmSvg(const SrmPlot& plot);

// EscapeMarkup
// `text` with &, <, >, " and ' escaped for XML and HTML text and attribute
// values (the SVG plots and the HTML report of `riskbound score`).
std::string EscapeMarkup(const std::string& text);

// One design point of an effective VC dimension fit.
struct DeviationPlotPoint {
  // Half-size n >= 1.
  double half_sample_count = 1.0;
  // Mean measured deviation and the fitted curve's value there, in [0, 1].
  double mean_deviation = 0.0;
  double fitted_deviation = 0.0;
};

// RenderDeviationSvg
// Returns a complete SVG 1.1 document of the measured mean deviation xi(n)
// (one circle of class "point-mean" per point) and the fitted curve Phi(n /
// h_hat) through the design points (one <polyline> of class
// "curve-fitted"), n on a logarithmic axis when n_max >= 10 n_min (linear
// otherwise), xi in [0, 1], with `title` and `subtitle` as headings (the
// caller says there that the fit is a heuristic). REQUIRES: points
// non-empty, sorted by half_sample_count, finite values. Thread-safe.
std::string RenderDeviationSvg(const std::string& title, const std::string& subtitle,
                               const std::vector<DeviationPlotPoint>& points);

}  // namespace riskbound::cli

#endif  // RISKBOUND_CLIENT_CLI_SVG_PLOT_H_
