// riskbound effective-vc: the effective VC dimension fit of Vapnik, Levin &
// LeCun (1994) on measured deviations (RPC FitEffectiveVcDimension). A
// heuristic estimate, never a bound; the output says so first.
#include <fstream>
#include <string>
#include <vector>

#include "absl/strings/str_cat.h"
#include "absl/strings/str_format.h"
#include "absl/strings/str_join.h"
#include "client_cli/args.h"
#include "client_cli/client.h"
#include "client_cli/command_start.h"
#include "client_cli/commands.h"
#include "client_cli/exit_codes.h"
#include "client_cli/format.h"
#include "client_cli/json_io.h"
#include "client_cli/svg_plot.h"
#include "client_cli/table.h"

namespace riskbound::cli {
namespace {

constexpr char kUsage[] =
    "riskbound effective-vc --input request.json [--plot fit.svg] [--output table|json]";

constexpr char kSummary[] =
    "Fits the effective VC dimension of Vapnik, Levin & LeCun (1994) to deviations measured\n"
    "by retraining a learner on randomly labelled samples: for each half-size n, repetitions\n"
    "of xi = |error rate on half 1 - error rate on half 2| after training on 2n random labels\n"
    "with the second half flipped. The answer is a HEURISTIC ESTIMATE, NEVER A BOUND: use it\n"
    "to compare or plan, never in a certificate or a gate (nothing in the server does). It\n"
    "gives h_hat, a bootstrap interval over the repetitions (sampling noise only), the\n"
    "residual per design point and flags (censored, poor fit, too few informative points,\n"
    "approximate training). --input reads a riskbound.v1.FitEffectiveVcDimensionRequest in\n"
    "the protobuf JSON mapping (- for stdin). --plot FILE also writes an SVG picture of the\n"
    "mean deviations and the fitted curve. See docs/capacity-from-data.md.\n"
    "\n"
    "exit codes: 0 answered; 2 usage; 3 invalid input (field named); 4 server unreachable;\n"
    "1 other failure (or the plot file could not be written).";

constexpr char kTerms[] =
    "  xi             the deviation measured at half-size n (mean over repetitions)\n"
    "  Phi(n/h)       the curve of Vapnik, Levin & LeCun (1994) the means are fitted to\n"
    "  h_hat          the least-squares h: a heuristic, not a VC dimension bound\n"
    "  interval       bootstrap percentile interval over the repetitions: sampling noise\n"
    "                 only, not the error of the curve itself\n"
    "  censored       xi near 1 everywhere: the data only say h >= 2 n_max\n";

std::vector<OptionSpec> Specs() {
  std::vector<OptionSpec> specs = {
      {"input", "FILE", "read the request from a JSON file (- for stdin)"},
      {"output", "table|json", "output format (default table)"},
      {"plot", "FILE", "also write an SVG plot of the mean deviations and the fitted curve"},
  };
  for (OptionSpec& s : ConnectionOptions()) specs.push_back(s);
  return specs;
}

void PrintTable(const v1::FitEffectiveVcDimensionResponse& r, std::ostream& out) {
  out << "Effective VC dimension (Vapnik, Levin & LeCun 1994): a HEURISTIC ESTIMATE, NOT A "
         "BOUND\n\n";
  auto row = [&](const std::string& label, const std::string& value) {
    out << absl::StrFormat("  %-14s %s\n", label, value);
  };
  row("h_hat", absl::StrCat(r.censored() ? ">= " : "",
                            FormatSignificant(r.effective_vc_dimension(), 5, Rounding::kNearest),
                            r.censored() ? " (censored: a lower limit only)" : ""));
  row(absl::StrCat(FormatSignificant(100.0 * r.interval_level(), 4, Rounding::kNearest),
                   "% interval"),
      absl::StrFormat("[%s, %s] (bootstrap, %d resamples: sampling noise only)",
                      FormatSignificant(r.interval_lower(), 5, Rounding::kDown),
                      FormatSignificant(r.interval_upper(), 5, Rounding::kUp),
                      r.bootstrap_resample_count()));
  row("rms residual", FormatSignificant(r.rms_residual(), 4, Rounding::kNearest));
  std::vector<std::string> flags;
  if (r.censored()) flags.push_back("censored");
  if (r.poor_fit()) flags.push_back("poor fit");
  if (r.few_informative_points()) flags.push_back("too few informative points");
  if (r.approximate_training()) flags.push_back("approximate training");
  row("flags", flags.empty() ? "none" : absl::StrJoin(flags, ", "));
  out << "\n";
  Table table({"n", "mean xi", "Phi(n/h_hat)", "residual"});
  for (const v1::DeviationFit& p : r.points()) {
    table.AddRow({absl::StrCat(p.half_sample_count()), absl::StrFormat("%.6f", p.mean_deviation()),
                  absl::StrFormat("%.6f", p.fitted_deviation()),
                  absl::StrFormat("%+.6f", p.residual())});
  }
  out << table.Render() << "\nNotes:\n";
  for (const std::string& note : r.notes()) out << "  - " << note << "\n";
}

}  // namespace

int RunEffectiveVc(const std::vector<std::string>& args, std::ostream& out, std::ostream& err) {
  const std::vector<OptionSpec> specs = Specs();
  CommandStart start;
  if (auto code =
          StartCommand("effective-vc", kUsage, kSummary, specs, args, out, err, &start, kTerms)) {
    return *code;
  }
  auto input = start.args.Get("input");
  if (!input) return UsageError(err, "effective-vc", "--input FILE is required");
  const std::optional<std::string> plot_path = start.args.Get("plot");
  if (plot_path.has_value() && plot_path->empty()) {
    return UsageError(err, "effective-vc", "--plot needs a file name");
  }
  v1::FitEffectiveVcDimensionRequest request;
  if (auto code = LoadJsonInput("effective-vc", *input, &request, err)) return *code;

  RiskBoundClient client(start.client);
  v1::FitEffectiveVcDimensionResponse response;
  auto ctx = client.NewContext();
  const grpc::Status status = client.stub()->FitEffectiveVcDimension(ctx.get(), request, &response);
  if (!status.ok()) return ReportRpcError(status, client.options(), err);
  if (start.json) {
    out << ToJson(response);
  } else {
    PrintTable(response, out);
  }
  if (plot_path.has_value()) {
    std::vector<DeviationPlotPoint> points;
    for (const v1::DeviationFit& p : response.points()) {
      points.push_back(
          {static_cast<double>(p.half_sample_count()), p.mean_deviation(), p.fitted_deviation()});
    }
    const std::string title =
        "Effective VC dimension fit (Vapnik, Levin & LeCun 1994): a heuristic, not a bound";
    const std::string subtitle =
        absl::StrFormat("h_hat %s%s%s; %s%% interval [%s, %s] (sampling noise only)",
                        response.censored() ? ">= " : "",
                        FormatSignificant(response.effective_vc_dimension(), 5, Rounding::kNearest),
                        response.censored() ? " (censored)" : "",
                        FormatSignificant(100.0 * response.interval_level(), 4, Rounding::kNearest),
                        FormatSignificant(response.interval_lower(), 5, Rounding::kDown),
                        FormatSignificant(response.interval_upper(), 5, Rounding::kUp));
    std::ofstream file(*plot_path, std::ios::binary | std::ios::trunc);
    file << RenderDeviationSvg(title, subtitle, points);
    file.close();
    if (!file) {
      err << "riskbound effective-vc: cannot write the plot to '" << *plot_path << "'\n";
      return kExitInternal;
    }
    (start.json ? err : out) << "Plot written to " << *plot_path << "\n";
  }
  return kExitOk;
}

}  // namespace riskbound::cli
