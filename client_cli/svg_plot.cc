#include "client_cli/svg_plot.h"

#include <algorithm>
#include <cmath>
#include <functional>
#include <string>
#include <vector>

#include "absl/strings/str_cat.h"
#include "absl/strings/str_format.h"
#include "absl/strings/str_split.h"
#include "client_cli/format.h"

namespace riskbound::cli {
namespace {

// Canvas and plot area, in SVG user units (pixels).
constexpr double kWidth = 850;
constexpr double kHeight = 505;
constexpr double kLeft = 80;
constexpr double kRight = 570;
constexpr double kBottom = 440;
constexpr double kLegendX = 590;

constexpr char kEmpiricalColor[] = "#1f5fa8";
constexpr char kPenaltyColor[] = "#c2571a";
constexpr char kBoundColor[] = "#1a1a1a";
constexpr char kChosenColor[] = "#c81e1e";


// 1, 2 or 5 times a power of ten, >= raw. REQUIRES: raw > 0.
double NiceStep(double raw) {
  const double e = std::pow(10.0, std::floor(std::log10(raw)));
  const double f = raw / e;
  if (f <= 1.0) return e;
  if (f <= 2.0) return 2.0 * e;
  if (f <= 5.0) return 5.0 * e;
  return 10.0 * e;
}

// A tick label without float noise ("0.3", "20", "1e+06").
std::string TickLabel(double v) {
  if (std::fabs(v) < 1e-12) return "0";
  return absl::StrFormat("%.6g", v);
}

// One axis: data value -> position, and its ticks.
struct Axis {
  std::function<double(double)> to_pixel;
  std::vector<double> ticks;
  bool log_scale = false;
};

Axis CapacityAxis(const std::vector<SrmPoint>& points) {
  double lo = points.front().capacity, hi = points.front().capacity;
  for (const SrmPoint& p : points) {
    lo = std::min(lo, p.capacity);
    hi = std::max(hi, p.capacity);
  }
  Axis axis;
  if (lo > 0 && hi >= 10.0 * lo) {
    axis.log_scale = true;
    const double span = std::log10(hi) - std::log10(lo);
    const double llo = std::log10(lo) - 0.06 * span;
    const double lhi = std::log10(hi) + 0.06 * span;
    for (const bool all_mantissas : {true, false}) {
      axis.ticks.clear();
      for (int e = static_cast<int>(std::floor(llo)); e <= static_cast<int>(std::ceil(lhi)); ++e) {
        for (const double m : {1.0, 2.0, 5.0}) {
          if (!all_mantissas && m != 1.0) continue;
          const double v = m * std::pow(10.0, e);
          if (std::log10(v) >= llo && std::log10(v) <= lhi) axis.ticks.push_back(v);
        }
      }
      if (axis.ticks.size() <= 12) break;
    }
    axis.to_pixel = [llo, lhi](double v) {
      return kLeft + (std::log10(v) - llo) / (lhi - llo) * (kRight - kLeft);
    };
    return axis;
  }
  if (hi - lo < 1e-9 * std::max(1.0, std::fabs(hi))) {
    lo = std::max(0.0, lo - 1.0);
    hi = hi + 1.0;
  }
  const double step = NiceStep((hi - lo) / 5.0);
  const double start = std::floor(lo / step) * step;
  const double stop = std::ceil(hi / step - 1e-9) * step;
  for (int i = 0; start + i * step <= stop + step * 1e-9; ++i) axis.ticks.push_back(start + i * step);
  axis.to_pixel = [start, stop](double v) {
    return kLeft + (v - start) / (stop - start) * (kRight - kLeft);
  };
  return axis;
}

Axis RiskAxis(const std::vector<SrmPoint>& points, double top_pixel) {
  double hi = 0.0;
  for (const SrmPoint& p : points) {
    hi = std::max({hi, p.upper_bound, p.empirical_risk, p.penalty});
  }
  if (hi <= 0.0) hi = 0.1;
  const double step = NiceStep(hi / 5.0);
  const double top = std::ceil(hi / step - 1e-9) * step;
  Axis axis;
  for (int i = 0; i * step <= top + step * 1e-9; ++i) axis.ticks.push_back(i * step);
  axis.to_pixel = [top, top_pixel](double v) {
    return kBottom - v / top * (kBottom - top_pixel);
  };
  return axis;
}

std::string Num(double v) { return absl::StrFormat("%.2f", v); }

// The box a centred text label covers, estimated from its length (sans-serif
// glyphs average about 0.6 em).
struct Box {
  double x0, y0, x1, y1;
  double center_x, baseline;
  bool Overlaps(const Box& o) const {
    return x0 < o.x1 && o.x0 < x1 && y0 < o.y1 && o.y0 < y1;
  }
};

// Places a label centred on x (kept inside the plot area) at the first of the
// candidate baselines where it overlaps no label in `placed` (the first
// baseline when none is free), and records it.
Box PlaceLabel(const std::string& text, double x, const std::vector<double>& baselines,
               double font_size, std::vector<Box>* placed) {
  const double half = 0.3 * font_size * static_cast<double>(text.size()) + 2;
  const double center = std::clamp(x, kLeft + half, kRight + 10 - half);
  auto box_at = [&](double baseline) {
    return Box{center - half, baseline - font_size, center + half, baseline + 3, center, baseline};
  };
  Box chosen = box_at(baselines.front());
  for (double b : baselines) {
    const Box candidate = box_at(b);
    bool free = true;
    for (const Box& o : *placed) free = free && !candidate.Overlaps(o);
    if (free) {
      chosen = candidate;
      break;
    }
  }
  placed->push_back(chosen);
  return chosen;
}

}  // namespace

std::string EscapeMarkup(const std::string& text) {
  std::string out;
  for (char c : text) {
    switch (c) {
      case '&': out += "&amp;"; break;
      case '<': out += "&lt;"; break;
      case '>': out += "&gt;"; break;
      case '"': out += "&quot;"; break;
      case '\'': out += "&apos;"; break;
      default: out += c;
    }
  }
  return out;
}

std::string RenderSrmSvg(const SrmPlot& plot) {
  const std::vector<std::string> subtitle_lines =
      plot.subtitle.empty() ? std::vector<std::string>{}
                            : absl::StrSplit(plot.subtitle, '\n');
  const double top = 80.0 + 16.0 * static_cast<double>(subtitle_lines.size());
  const double height = kHeight + 16.0 * static_cast<double>(subtitle_lines.size());
  const Axis x = CapacityAxis(plot.points);
  const Axis y = RiskAxis(plot.points, top);

  std::string s;
  absl::StrAppend(&s, "<?xml version=\"1.0\" encoding=\"UTF-8\"?>\n");
  absl::StrAppendFormat(&s,
                        "<svg xmlns=\"http://www.w3.org/2000/svg\" version=\"1.1\" width=\"%s\" "
                        "height=\"%s\" viewBox=\"0 0 %s %s\" font-family=\"sans-serif\">\n",
                        Num(kWidth), Num(height), Num(kWidth), Num(height));
  absl::StrAppend(&s, "  <title>", EscapeMarkup(plot.title), "</title>\n");
  absl::StrAppend(&s, plot.heuristic
                          ? "  <desc>Empirical risk, penalty and their sum (a heuristic score, "
                            "NOT a bound) of each candidate against its fitted effective VC "
                            "dimension; the ring marks the candidate with the smallest "
                            "score.</desc>\n"
                          : "  <desc>Empirical risk, capacity penalty and their sum (the bound) "
                            "of each candidate against its capacity; the ring marks the "
                            "candidate with the smallest bound.</desc>\n");
  absl::StrAppendFormat(&s, "  <rect x=\"0\" y=\"0\" width=\"%s\" height=\"%s\" fill=\"white\"/>\n",
                        Num(kWidth), Num(height));

  // Headings.
  absl::StrAppend(&s, "  <text x=\"40\" y=\"34\" font-size=\"19\" font-weight=\"bold\">",
                  EscapeMarkup(plot.title), "</text>\n");
  for (std::size_t i = 0; i < subtitle_lines.size(); ++i) {
    absl::StrAppendFormat(&s, "  <text x=\"40\" y=\"%s\" font-size=\"12.5\" fill=\"#444\">%s</text>\n",
                          Num(56.0 + 16.0 * static_cast<double>(i)), EscapeMarkup(subtitle_lines[i]));
  }

  // Grid, axes, ticks.
  absl::StrAppend(&s, "  <g class=\"grid\" stroke=\"#e4e4e4\" stroke-width=\"1\">\n");
  for (double t : y.ticks) {
    absl::StrAppendFormat(&s, "    <line x1=\"%s\" y1=\"%s\" x2=\"%s\" y2=\"%s\"/>\n", Num(kLeft),
                          Num(y.to_pixel(t)), Num(kRight), Num(y.to_pixel(t)));
  }
  for (double t : x.ticks) {
    absl::StrAppendFormat(&s, "    <line x1=\"%s\" y1=\"%s\" x2=\"%s\" y2=\"%s\"/>\n",
                          Num(x.to_pixel(t)), Num(top), Num(x.to_pixel(t)), Num(kBottom));
  }
  absl::StrAppend(&s, "  </g>\n");
  absl::StrAppend(&s, "  <g class=\"axes\" stroke=\"#333\" stroke-width=\"1.2\">\n");
  absl::StrAppendFormat(&s, "    <line x1=\"%s\" y1=\"%s\" x2=\"%s\" y2=\"%s\"/>\n", Num(kLeft),
                        Num(kBottom), Num(kRight), Num(kBottom));
  absl::StrAppendFormat(&s, "    <line x1=\"%s\" y1=\"%s\" x2=\"%s\" y2=\"%s\"/>\n", Num(kLeft),
                        Num(top), Num(kLeft), Num(kBottom));
  for (double t : x.ticks) {
    absl::StrAppendFormat(&s, "    <line x1=\"%s\" y1=\"%s\" x2=\"%s\" y2=\"%s\"/>\n",
                          Num(x.to_pixel(t)), Num(kBottom), Num(x.to_pixel(t)), Num(kBottom + 6));
  }
  for (double t : y.ticks) {
    absl::StrAppendFormat(&s, "    <line x1=\"%s\" y1=\"%s\" x2=\"%s\" y2=\"%s\"/>\n",
                          Num(kLeft - 6), Num(y.to_pixel(t)), Num(kLeft), Num(y.to_pixel(t)));
  }
  absl::StrAppend(&s, "  </g>\n");
  absl::StrAppend(&s, "  <g class=\"tick-labels\" font-size=\"11.5\" fill=\"#333\">\n");
  for (double t : x.ticks) {
    absl::StrAppendFormat(&s, "    <text x=\"%s\" y=\"%s\" text-anchor=\"middle\">%s</text>\n",
                          Num(x.to_pixel(t)), Num(kBottom + 21), TickLabel(t));
  }
  for (double t : y.ticks) {
    absl::StrAppendFormat(&s, "    <text x=\"%s\" y=\"%s\" text-anchor=\"end\">%s</text>\n",
                          Num(kLeft - 10), Num(y.to_pixel(t) + 4), TickLabel(t));
  }
  absl::StrAppend(&s, "  </g>\n");
  const std::string x_label =
      x.log_scale ? absl::StrCat(plot.capacity_label, " (log scale)") : plot.capacity_label;
  absl::StrAppendFormat(&s,
                        "  <text class=\"axis-label\" x=\"%s\" y=\"%s\" font-size=\"13.5\" "
                        "text-anchor=\"middle\">%s</text>\n",
                        Num((kLeft + kRight) / 2), Num(kBottom + 46), EscapeMarkup(x_label));
  absl::StrAppendFormat(&s,
                        "  <text class=\"axis-label\" x=\"%s\" y=\"%s\" font-size=\"13.5\" "
                        "text-anchor=\"middle\" transform=\"rotate(-90 %s %s)\">"
                        "risk (true or training error rate)</text>\n",
                        Num(26), Num((top + kBottom) / 2), Num(26), Num((top + kBottom) / 2));

  // The three curves, one polyline each, with a dot per candidate.
  struct Curve {
    const char* cls;
    const char* color;
    const char* dash;
    double width;
    double (*value)(const SrmPoint&);
    // The point's label: observed values to nearest, penalty and bound
    // rounded up (format.h).
    std::string (*label)(double);
  };
  const Curve curves[] = {
      {"curve-empirical", kEmpiricalColor, "", 2.0,
       [](const SrmPoint& p) { return p.empirical_risk; }, FormatObserved},
      {"curve-penalty", kPenaltyColor, "7 4", 2.0, [](const SrmPoint& p) { return p.penalty; },
       FormatUpper},
      {"curve-bound", kBoundColor, "", 2.8, [](const SrmPoint& p) { return p.upper_bound; },
       FormatUpper},
  };
  for (const Curve& c : curves) {
    std::string pts;
    for (const SrmPoint& p : plot.points) {
      absl::StrAppend(&pts, pts.empty() ? "" : " ", Num(x.to_pixel(p.capacity)), ",",
                      Num(y.to_pixel(c.value(p))));
    }
    absl::StrAppendFormat(&s,
                          "  <polyline class=\"%s\" points=\"%s\" fill=\"none\" stroke=\"%s\" "
                          "stroke-width=\"%s\" stroke-linejoin=\"round\"%s/>\n",
                          c.cls, pts, c.color, Num(c.width),
                          *c.dash ? absl::StrCat(" stroke-dasharray=\"", c.dash, "\"") : "");
    absl::StrAppendFormat(&s, "  <g class=\"points\" fill=\"%s\">\n", c.color);
    for (const SrmPoint& p : plot.points) {
      absl::StrAppendFormat(&s, "    <circle cx=\"%s\" cy=\"%s\" r=\"3.2\"><title>%s: %s</title></circle>\n",
                            Num(x.to_pixel(p.capacity)), Num(y.to_pixel(c.value(p))),
                            EscapeMarkup(p.id), c.label(c.value(p)));
    }
    absl::StrAppend(&s, "  </g>\n");
  }

  // The chosen candidate: a ring on its bound and a drop line to the axis.
  const SrmPoint& chosen = plot.points[plot.chosen_index];
  const double cx = x.to_pixel(chosen.capacity);
  const double cy = y.to_pixel(chosen.upper_bound);
  absl::StrAppendFormat(&s,
                        "  <line class=\"chosen-drop\" x1=\"%s\" y1=\"%s\" x2=\"%s\" y2=\"%s\" "
                        "stroke=\"%s\" stroke-width=\"1.2\" stroke-dasharray=\"2 3\"/>\n",
                        Num(cx), Num(cy + 9), Num(cx), Num(kBottom), kChosenColor);
  absl::StrAppendFormat(&s,
                        "  <circle id=\"chosen-marker\" cx=\"%s\" cy=\"%s\" r=\"9\" fill=\"none\" "
                        "stroke=\"%s\" stroke-width=\"2.5\"/>\n",
                        Num(cx), Num(cy), kChosenColor);

  // Labels: the chosen candidate's first, then every other candidate's name
  // above its bound point, or below it where that would overlap a label
  // already placed.
  std::vector<Box> placed;
  const Box chosen_box = PlaceLabel(absl::StrCat("chosen: ", chosen.id), cx, {cy - 16}, 12.5,
                                    &placed);
  absl::StrAppendFormat(&s,
                        "  <text class=\"chosen-label\" x=\"%s\" y=\"%s\" font-size=\"12.5\" "
                        "font-weight=\"bold\" fill=\"%s\" text-anchor=\"middle\" stroke=\"white\" "
                        "stroke-width=\"3\" paint-order=\"stroke\">chosen: %s</text>\n",
                        Num(chosen_box.center_x), Num(chosen_box.baseline), kChosenColor,
                        EscapeMarkup(chosen.id));
  absl::StrAppend(&s, "  <g class=\"candidate-labels\" font-size=\"10.5\" fill=\"#555\" "
                      "text-anchor=\"middle\" stroke=\"white\" stroke-width=\"3\" "
                      "paint-order=\"stroke\">\n");
  for (std::size_t i = 0; i < plot.points.size(); ++i) {
    if (i == plot.chosen_index) continue;
    const SrmPoint& p = plot.points[i];
    const double px = x.to_pixel(p.capacity);
    const double py = y.to_pixel(p.upper_bound);
    const Box box = PlaceLabel(p.id, px, {py - 9, py + 19, py - 24}, 10.5, &placed);
    absl::StrAppendFormat(&s, "    <text x=\"%s\" y=\"%s\">%s</text>\n", Num(box.center_x),
                          Num(box.baseline), EscapeMarkup(p.id));
  }
  absl::StrAppend(&s, "  </g>\n");

  // Legend.
  const double ly = top + 10;
  absl::StrAppendFormat(&s,
                        "  <g class=\"legend\" font-size=\"12\">\n    <rect x=\"%s\" y=\"%s\" "
                        "width=\"245\" height=\"%s\" fill=\"white\" stroke=\"#bbb\"/>\n",
                        Num(kLegendX), Num(ly), Num(plot.fragile ? 138 : 118));
  const struct {
    const char* color;
    const char* dash;
    double width;
    const char* text;
  } entries[] = {
      {kEmpiricalColor, "", 2.0, "empirical risk (training)"},
      {kPenaltyColor, "7 4", 2.0, "capacity penalty"},
      {kBoundColor, "", 2.8,
       plot.heuristic ? "score (heuristic, NOT a bound)" : "bound = empirical + penalty"},
  };
  double ey = ly + 22;
  for (const auto& e : entries) {
    absl::StrAppendFormat(&s,
                          "    <line x1=\"%s\" y1=\"%s\" x2=\"%s\" y2=\"%s\" stroke=\"%s\" "
                          "stroke-width=\"%s\"%s/>\n",
                          Num(kLegendX + 12), Num(ey), Num(kLegendX + 44), Num(ey), e.color,
                          Num(e.width),
                          *e.dash ? absl::StrCat(" stroke-dasharray=\"", e.dash, "\"") : "");
    absl::StrAppendFormat(&s, "    <text x=\"%s\" y=\"%s\">%s</text>\n", Num(kLegendX + 52),
                          Num(ey + 4), e.text);
    ey += 24;
  }
  absl::StrAppendFormat(&s,
                        "    <circle cx=\"%s\" cy=\"%s\" r=\"7\" fill=\"none\" stroke=\"%s\" "
                        "stroke-width=\"2.5\"/>\n    <text x=\"%s\" y=\"%s\">chosen: smallest "
                        "%s</text>\n",
                        Num(kLegendX + 28), Num(ey), kChosenColor, Num(kLegendX + 52), Num(ey + 4),
                        plot.heuristic ? "score" : "bound");
  if (plot.fragile) {
    ey += 22;
    absl::StrAppendFormat(&s,
                          "    <text x=\"%s\" y=\"%s\" fill=\"%s\">fragile: near ties, see "
                          "table</text>\n",
                          Num(kLegendX + 12), Num(ey + 4), kChosenColor);
  }
  absl::StrAppend(&s, "  </g>\n</svg>\n");
  return s;
}

std::string RenderDeviationSvg(const std::string& title, const std::string& subtitle,
                               const std::vector<DeviationPlotPoint>& points) {
  constexpr double kWidth = 720, kHeight = 440;
  constexpr double kLeft = 70, kRight = 30, kTop = 70, kBottom = 60;
  const double lo = points.front().half_sample_count;
  const double hi = std::max(points.back().half_sample_count, lo + 1.0);
  const bool log_axis = lo > 0 && hi >= 10.0 * lo;
  auto px = [&](double n) {
    const double f = log_axis ? std::log(n / lo) / std::log(hi / lo) : (n - lo) / (hi - lo);
    return kLeft + f * (kWidth - kLeft - kRight);
  };
  auto py = [&](double xi) {
    return kTop + (1.0 - std::clamp(xi, 0.0, 1.0)) * (kHeight - kTop - kBottom);
  };
  std::string out = absl::StrFormat(
      "<?xml version=\"1.0\" encoding=\"UTF-8\"?>\n"
      "<svg xmlns=\"http://www.w3.org/2000/svg\" version=\"1.1\" width=\"%g\" "
      "height=\"%g\" viewBox=\"0 0 %g %g\" font-family=\"sans-serif\">\n"
      "<rect width=\"100%%\" height=\"100%%\" fill=\"white\"/>\n"
      "<text x=\"%g\" y=\"24\" font-size=\"15\" font-weight=\"bold\">%s</text>\n"
      "<text x=\"%g\" y=\"44\" font-size=\"12\">%s</text>\n",
      kWidth, kHeight, kWidth, kHeight, kLeft, EscapeMarkup(title), kLeft, EscapeMarkup(subtitle));
  for (double xi : {0.0, 0.25, 0.5, 0.75, 1.0}) {
    absl::StrAppendFormat(&out,
                          "<line x1=\"%.2f\" y1=\"%.2f\" x2=\"%.2f\" y2=\"%.2f\" "
                          "stroke=\"#e0e0e0\"/>\n<text x=\"%.2f\" y=\"%.2f\" font-size=\"11\" "
                          "text-anchor=\"end\">%g</text>\n",
                          kLeft, py(xi), kWidth - kRight, py(xi), kLeft - 6, py(xi) + 4, xi);
  }
  for (const DeviationPlotPoint& p : points) {
    absl::StrAppendFormat(&out,
                          "<text x=\"%.2f\" y=\"%.2f\" font-size=\"11\" "
                          "text-anchor=\"middle\">%g</text>\n",
                          px(p.half_sample_count), kHeight - kBottom + 16, p.half_sample_count);
  }
  absl::StrAppendFormat(&out,
                        "<line x1=\"%.2f\" y1=\"%.2f\" x2=\"%.2f\" y2=\"%.2f\" stroke=\"black\"/>\n"
                        "<line x1=\"%.2f\" y1=\"%.2f\" x2=\"%.2f\" y2=\"%.2f\" stroke=\"black\"/>\n"
                        "<text x=\"%.2f\" y=\"%.2f\" font-size=\"12\" text-anchor=\"middle\">"
                        "half-size n%s</text>\n"
                        "<text x=\"16\" y=\"%.2f\" font-size=\"12\" transform=\"rotate(-90 16 "
                        "%.2f)\" text-anchor=\"middle\">deviation xi</text>\n",
                        kLeft, kHeight - kBottom, kWidth - kRight, kHeight - kBottom, kLeft, kTop,
                        kLeft, kHeight - kBottom, (kLeft + kWidth - kRight) / 2, kHeight - 18,
                        log_axis ? " (log scale)" : "", (kTop + kHeight - kBottom) / 2,
                        (kTop + kHeight - kBottom) / 2);
  out += "<polyline class=\"curve-fitted\" fill=\"none\" stroke=\"";
  out += kBoundColor;
  out += "\" stroke-width=\"2\" points=\"";
  for (const DeviationPlotPoint& p : points) {
    absl::StrAppendFormat(&out, "%.2f,%.2f ", px(p.half_sample_count), py(p.fitted_deviation));
  }
  out += "\"/>\n";
  for (const DeviationPlotPoint& p : points) {
    absl::StrAppendFormat(&out,
                          "<circle class=\"point-mean\" cx=\"%.2f\" cy=\"%.2f\" r=\"4\" "
                          "fill=\"%s\"/>\n",
                          px(p.half_sample_count), py(p.mean_deviation), kEmpiricalColor);
  }
  absl::StrAppendFormat(&out,
                        "<circle cx=\"%.2f\" cy=\"%.2f\" r=\"4\" fill=\"%s\"/><text x=\"%.2f\" "
                        "y=\"%.2f\" font-size=\"11\">mean measured xi(n)</text>\n"
                        "<line x1=\"%.2f\" y1=\"%.2f\" x2=\"%.2f\" y2=\"%.2f\" stroke=\"%s\" "
                        "stroke-width=\"2\"/><text x=\"%.2f\" y=\"%.2f\" font-size=\"11\">fitted "
                        "Phi(n / h_hat) (heuristic)</text>\n</svg>\n",
                        kWidth - 260, kTop + 6, kEmpiricalColor, kWidth - 250, kTop + 10,
                        kWidth - 266, kTop + 24, kWidth - 254, kTop + 24, kBoundColor, kWidth - 250,
                        kTop + 28);
  return out;
}

}  // namespace riskbound::cli
