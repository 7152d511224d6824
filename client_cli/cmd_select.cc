// riskbound select: structural risk minimization along a nested structure.
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
    "riskbound select --input structure.json [--heuristic] [--plot srm.svg]\n"
    "                 [--output table|json]";
constexpr char kSummary[] =
    "Structural risk minimization: for a nested structure of model classes of growing\n"
    "capacity (fixed, with their delta weights, before the training sample was seen) and the\n"
    "model fitted in each, asks the server for every candidate's training-set bound at its share\n"
    "of delta and picks the smallest (ties go to the smaller capacity). By the union bound the\n"
    "chosen bound holds with probability >= 1 - delta. The choice is flagged fragile when\n"
    "another candidate's bound is within the fragility tolerance (default 0.01).\n"
    "\n"
    "structure.json is a riskbound.v1.SelectStructureRequest in the protobuf JSON mapping (- for\n"
    "stdin), e.g.\n"
    "  {\"family\": \"BOUND_FAMILY_VC_ADDITIVE\", \"failure_probability\": 0.05,\n"
    "   \"delta_spread\": \"DELTA_SPREAD_INVERSE_SQUARE\",\n"
    "   \"structure\": [{\"id\": \"depth-2\", \"error_count\": 2400, \"sample_count\": 20000,\n"
    "                  \"capacity\": {\"vc_dimension\": 8}}, ...]}\n"
    "--plot FILE writes an SVG picture: empirical risk, capacity penalty and bound against\n"
    "capacity, the chosen candidate ringed.\n"
    "\n"
    "--heuristic (the request's heuristic field) ranks the classes instead by the VC formula\n"
    "with each class's FITTED effective VC dimension (structure[i].effective_vc_dimension, from\n"
    "riskbound effective-vc; Vapnik, Levin & LeCun 1994) in place of its VC dimension. That\n"
    "answer is a HEURISTIC RANKING, NOT A CERTIFICATE: its scores are no bounds, nothing holds\n"
    "with the stated probability, and no gate or certificate takes an effective VC dimension.\n"
    "Use it to compare classes or to plan. The candidates then carry effective_vc_dimension and\n"
    "no capacity, and the family is vc-additive or vc-relative.\n"
    "\n"
    "exit codes: 0 answered; 1 the plot file could not be written; 2 usage; 3 invalid input\n"
    "(field named); 4 server unreachable.";

constexpr char kTerms[] =
    "  *              the chosen candidate: the smallest bound (ties: the smaller capacity)\n"
    "  field          the candidate's place in the request, structure[i], counted from 0 as\n"
    "                 in the server's error messages and chosen_index\n"
    "  VC dim h, ln|H|\n"
    "                 the capacity of the candidate's class: how rich it is (VC dimension, or\n"
    "                 natural log of the number of hypotheses)\n"
    "  empirical      the candidate's training error rate\n"
    "  penalty        bound minus empirical: what the bound adds for the capacity and the\n"
    "                 sample size; rounded up\n"
    "  bound          upper bound on the candidate's true error; rounded up\n"
    "  delta used     the candidate's share of the failure probability (rounded up)\n"
    "  weight         the candidate's fraction of delta, fixed before the data were seen\n"
    "  delta          the probability that a bound is wrong; the confidence is 1 - delta\n"
    "  union bound    all the candidates' bounds hold together with probability >= 1 - (sum\n"
    "                 of their deltas), so the chosen one holds although it was picked by the\n"
    "                 data\n"
    "  vacuous        the bound is 1 or more: it says nothing\n"
    "  fragile        another candidate's bound is within the fragility tolerance of the\n"
    "                 chosen one: the data do not clearly separate them\n"
    "  h_hat (fitted) heuristic mode: the class's fitted effective VC dimension, an estimate\n"
    "                 and not a capacity\n"
    "  score          heuristic mode: the bound's formula with h_hat; it ranks the classes and\n"
    "                 is NOT a bound on the true error\n";

std::vector<OptionSpec> Specs() {
  std::vector<OptionSpec> specs = {
      {"input", "FILE", "the SelectStructureRequest as JSON (- for stdin); required"},
      {"heuristic", "",
       "rank by the candidates' fitted effective_vc_dimension (request heuristic = true): a "
       "heuristic ranking, NOT a certificate"},
      {"plot", "FILE", "also write an SVG plot of the three curves to FILE"},
      {"output", "table|json", "output format (default table)"},
  };
  for (OptionSpec& s : ConnectionOptions()) specs.push_back(s);
  return specs;
}

int Usage(std::ostream& err, const std::string& message) {
  return UsageError(err, "select", message);
}

std::string CapacityHeader(const v1::SelectStructureResponse& r) {
  if (r.heuristic()) return "h_hat (fitted)";
  return r.capacity_measure() == "vc_dimension" ? "VC dim h" : "ln|H|";
}

std::string CapacityText(const v1::SelectStructureResponse& r, double capacity) {
  if (r.heuristic()) return FormatSignificant(capacity, 4, Rounding::kNearest);
  return r.capacity_measure() == "vc_dimension" ? absl::StrFormat("%.0f", capacity)
                                                : FormatSignificant(capacity, 4, Rounding::kUp);
}

// The lines both tables end with: the delta rule, the notes (the answer's,
// then each candidate's) and the cautions.
void PrintAccountingNotesCautions(const v1::SelectStructureResponse& r, std::ostream& out) {
  out << "Delta accounting: " << r.delta_rule() << "\n";
  for (const std::string& note : r.notes()) out << "Note: " << note << "\n";
  for (const v1::CandidateBound& c : r.candidates()) {
    for (const std::string& note : c.notes()) out << "Note (" << c.id() << "): " << note << "\n";
  }
  PrintCautions(r.cautions(), out);
}

// Heuristic mode's table: the same columns with "score" for "bound", headed
// and closed so that it cannot be read as a certificate.
void PrintHeuristicTable(const v1::SelectStructureResponse& r, std::ostream& out) {
  out << absl::StrFormat(
      "HEURISTIC RANKING, NOT A CERTIFICATE: %d candidates ranked by the %s formula with fitted\n"
      "effective VC dimensions (delta = %s spread over them)\n\n",
      r.candidates_size(), r.family_name(), FormatInput(r.requested_failure_probability()));
  Table table({"", "field", "candidate", CapacityHeader(r), "empirical", "penalty", "score",
               "delta used", "weight", "vacuous"});
  for (int i = 0; i < r.candidates_size(); ++i) {
    const v1::CandidateBound& c = r.candidates(i);
    table.AddRow(
        {static_cast<std::uint32_t>(i) == r.chosen_index() ? "*" : "",
         absl::StrCat("structure[", i, "]"), c.id(), CapacityText(r, c.capacity()),
         FormatObserved(c.empirical_risk()), FormatUpper(c.penalty()),
         FormatUpper(c.risk_upper_bound()), FormatFailureProbability(c.failure_probability()),
         FormatSignificant(c.delta_weight(), 4, Rounding::kUp), c.vacuous() ? "yes" : "no"});
  }
  out << table.Render() << "\n";
  const v1::CandidateBound& chosen = r.candidates(static_cast<int>(r.chosen_index()));
  out << absl::StrFormat(
      "Ranked first (*): %s (structure[%d]): heuristic score %s, NOT a bound on its true "
      "error%s\n",
      r.chosen_id(), r.chosen_index(), FormatUpper(chosen.risk_upper_bound()),
      chosen.vacuous() ? " (>= 1: the ranking says nothing)" : "");
  if (r.fragile()) {
    out << absl::StrFormat(
        "WARNING: fragile ranking: %s within %s of the first score; the fits do not clearly "
        "separate them.\n",
        absl::StrJoin(r.within_tolerance_ids(), ", "), FormatInput(r.fragility_tolerance()));
  } else {
    out << absl::StrFormat("Not fragile: no other candidate's score is within %s.\n",
                           FormatInput(r.fragility_tolerance()));
  }
  PrintAccountingNotesCautions(r, out);
}

void PrintTable(const v1::SelectStructureResponse& r, std::ostream& out) {
  if (r.heuristic()) {
    PrintHeuristicTable(r, out);
    return;
  }
  out << absl::StrFormat(
      "Structural risk minimization with %s over %d candidates (delta = %s spread over them)\n\n",
      r.family_name(), r.candidates_size(), FormatInput(r.requested_failure_probability()));
  Table table({"", "field", "candidate", CapacityHeader(r), "empirical", "penalty", "bound", "delta used",
               "weight", "vacuous"});
  for (int i = 0; i < r.candidates_size(); ++i) {
    const v1::CandidateBound& c = r.candidates(i);
    table.AddRow({static_cast<std::uint32_t>(i) == r.chosen_index() ? "*" : "",
                  absl::StrCat("structure[", i, "]"), c.id(),
                  CapacityText(r, c.capacity()), FormatObserved(c.empirical_risk()),
                  FormatUpper(c.penalty()), FormatUpper(c.risk_upper_bound()),
                  FormatFailureProbability(c.failure_probability()),
                  FormatSignificant(c.delta_weight(), 4, Rounding::kUp),
                  c.vacuous() ? "yes" : "no"});
  }
  out << table.Render() << "\n";
  const v1::CandidateBound& chosen = r.candidates(static_cast<int>(r.chosen_index()));
  out << absl::StrFormat(
      "Chosen (*): %s (structure[%d]): true error <= %s with probability >= %s%s\n",
      r.chosen_id(), r.chosen_index(),
      FormatUpper(chosen.risk_upper_bound()), FormatConfidence(r.spent_failure_probability()),
      chosen.vacuous() ? " (vacuous: says nothing)" : "");
  if (r.fragile()) {
    out << absl::StrFormat(
        "WARNING: fragile choice: %s within %s of the chosen bound; the data do not clearly "
        "separate them. Prefer the simpler candidate, or gather more data before relying on "
        "the choice.\n",
        absl::StrJoin(r.within_tolerance_ids(), ", "), FormatInput(r.fragility_tolerance()));
  } else {
    out << absl::StrFormat("Not fragile: no other candidate's bound is within %s.\n",
                           FormatInput(r.fragility_tolerance()));
  }
  PrintAccountingNotesCautions(r, out);
}

SrmPlot PlotOf(const v1::SelectStructureResponse& r) {
  SrmPlot plot;
  plot.title = absl::StrCat("Structural risk minimization (", r.family_name(), ")");
  const v1::CandidateBound& chosen = r.candidates(static_cast<int>(r.chosen_index()));
  std::string weights = "the caller's weights w_k";
  if (r.delta_spread() == v1::DELTA_SPREAD_UNIFORM) weights = "equal weights 1/K";
  if (r.delta_spread() == v1::DELTA_SPREAD_INVERSE_SQUARE) weights = "weights 6/(pi^2 k^2)";
  plot.subtitle = absl::StrFormat(
      "Chosen: %s, true error <= %s with probability >= %s%s.\n"
      "Bound = empirical risk + capacity penalty, each at its share of delta = %s (%s).",
      r.chosen_id(), FormatUpper(chosen.risk_upper_bound()),
      FormatConfidence(r.spent_failure_probability()),
      r.fragile() ? absl::StrCat("; FRAGILE: ", absl::StrJoin(r.within_tolerance_ids(), ", "),
                                 " within ", FormatInput(r.fragility_tolerance()))
                  : "",
      FormatInput(r.requested_failure_probability()), weights);
  plot.capacity_label = r.capacity_measure() == "vc_dimension"
                            ? "capacity: VC dimension h of the class"
                            : "capacity: ln |H| of the class";
  for (const v1::CandidateBound& c : r.candidates()) {
    plot.points.push_back(
        {c.id(), c.capacity(), c.empirical_risk(), c.penalty(), c.risk_upper_bound()});
  }
  plot.chosen_index = r.chosen_index();
  plot.fragile = r.fragile();
  if (r.heuristic()) {
    plot.heuristic = true;
    plot.title =
        absl::StrCat("HEURISTIC ranking, NOT a certificate (", r.family_name(), ", fitted h_hat)");
    plot.subtitle = absl::StrFormat(
        "Ranked first: %s, score %s: NOT a bound on its true error%s.\n"
        "Score = empirical risk + penalty of the VC formula with the fitted effective VC "
        "dimension.",
        r.chosen_id(), FormatUpper(chosen.risk_upper_bound()),
        r.fragile() ? absl::StrCat("; FRAGILE: ", absl::StrJoin(r.within_tolerance_ids(), ", "),
                                   " within ", FormatInput(r.fragility_tolerance()))
                    : "");
    plot.capacity_label = "fitted effective VC dimension h_hat (heuristic)";
  }
  return plot;
}

}  // namespace

int RunSelect(const std::vector<std::string>& args, std::ostream& out, std::ostream& err) {
  const std::vector<OptionSpec> specs = Specs();
  CommandStart start;
  if (auto code = StartCommand("select", kUsage, kSummary, specs, args, out, err, &start, kTerms)) {
    return *code;
  }
  const std::optional<std::string> input = start.args.Get("input");
  if (!input.has_value()) return Usage(err, "--input FILE is required (the structure as JSON)");
  const std::optional<std::string> plot_path = start.args.Get("plot");
  if (plot_path.has_value() && plot_path->empty()) return Usage(err, "--plot needs a file name");

  v1::SelectStructureRequest request;
  if (auto code = LoadJsonInput("select", *input, &request, err)) return *code;
  if (start.args.Has("heuristic")) request.set_heuristic(true);

  RiskBoundClient client(start.client);
  v1::SelectStructureResponse response;
  auto ctx = client.NewContext();
  const grpc::Status status = client.stub()->SelectStructure(ctx.get(), request, &response);
  if (!status.ok()) return ReportRpcError(status, client.options(), err);
  if (response.candidates_size() == 0 ||
      response.chosen_index() >= static_cast<std::uint32_t>(response.candidates_size())) {
    err << "riskbound select: the server's answer has no chosen candidate\n";
    return kExitInternal;
  }
  if (start.json) {
    out << ToJson(response);
  } else {
    PrintTable(response, out);
  }
  if (plot_path.has_value()) {
    std::ofstream file(*plot_path, std::ios::binary | std::ios::trunc);
    file << RenderSrmSvg(PlotOf(response));
    file.close();
    if (!file) {
      err << "riskbound select: cannot write the plot to '" << *plot_path << "'\n";
      return kExitInternal;
    }
    (start.json ? err : out) << "Plot written to " << *plot_path << "\n";
  }
  return kExitOk;
}

}  // namespace riskbound::cli
