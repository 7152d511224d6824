// riskbound certify: certificates on one model's true error.
#include <cmath>
#include <optional>
#include <string>
#include <vector>

#include "absl/strings/str_cat.h"
#include "absl/strings/str_format.h"
#include "absl/strings/str_join.h"
#include "client_cli/args.h"
#include "client_cli/client.h"
#include "client_cli/commands.h"
#include "client_cli/exit_codes.h"
#include "client_cli/json_io.h"
#include "client_cli/table.h"
#include "service/core/families.h"

namespace riskbound::cli {
namespace {

constexpr char kUsage[] =
    "riskbound certify --errors K --samples N [--delta D] [--family NAME|all] [options]\n"
    "       riskbound certify --input request.json [options]";
constexpr char kSummary[] =
    "Asks the server for certificates: upper bounds on the model's true error that hold with\n"
    "probability >= 1 - delta. Give hold-out counts (--errors/--samples), training counts with a\n"
    "capacity (--train-errors/--train-samples with --vc-dimension, --hypothesis-count or\n"
    "--log-hypothesis-count), or both; or a whole riskbound.v1.CertifyRequest in the protobuf\n"
    "JSON mapping with --input (- for stdin). Without --family, one recommended family gets the\n"
    "whole delta; with several families (or 'all') each gets its share (union bound) and the\n"
    "tightest is reported.";

std::vector<OptionSpec> Specs() {
  std::vector<OptionSpec> specs = {
      {"errors", "K", "hold-out errors"},
      {"samples", "N", "hold-out examples"},
      {"train-errors", "K", "training errors"},
      {"train-samples", "M", "training examples"},
      {"vc-dimension", "H", "capacity: VC dimension of the class"},
      {"hypothesis-count", "N", "capacity: number of hypotheses of a finite class"},
      {"log-hypothesis-count", "X", "capacity: ln of the number of hypotheses"},
      {"baseline-error-rate", "P", "error rate of a trivial classifier; bounds at or above it are vacuous"},
      {"delta", "D", "failure probability in (0,1) (default 0.05: 95% confidence)"},
      {"family", "NAME[,NAME]", "bound families (see `riskbound families`), or 'all'", true},
      {"weights", "W[,W]", "delta weights of the listed families, summing to <= 1"},
      {"input", "FILE", "read the request from a JSON file (- for stdin)"},
      {"output", "table|json", "output format (default table)"},
  };
  for (OptionSpec& s : ConnectionOptions()) specs.push_back(s);
  return specs;
}

// A usage problem: message on stderr, exit 2.
int Usage(std::ostream& err, const std::string& message) {
  err << "riskbound certify: " << message << "\n(see riskbound certify --help)\n";
  return kExitUsage;
}

// Builds the request from the evidence flags. Returns a usage message on error.
std::optional<std::string> RequestFromFlags(const ParsedArgs& args, v1::CertifyRequest* req) {
  auto u64 = [&](const char* name, std::optional<std::uint64_t>* out) -> std::optional<std::string> {
    auto v = args.GetUint64(name);
    if (!v.ok()) return std::string(v.status().message());
    *out = *v;
    return std::nullopt;
  };
  auto dbl = [&](const char* name, std::optional<double>* out) -> std::optional<std::string> {
    auto v = args.GetDouble(name);
    if (!v.ok()) return std::string(v.status().message());
    *out = *v;
    return std::nullopt;
  };
  std::optional<std::uint64_t> errors, samples, train_errors, train_samples, vc, hyp;
  std::optional<double> log_hyp, baseline, delta;
  for (auto problem : {u64("errors", &errors), u64("samples", &samples),
                       u64("train-errors", &train_errors), u64("train-samples", &train_samples),
                       u64("vc-dimension", &vc), u64("hypothesis-count", &hyp),
                       dbl("log-hypothesis-count", &log_hyp),
                       dbl("baseline-error-rate", &baseline), dbl("delta", &delta)}) {
    if (problem) return problem;
  }
  if (errors.has_value() != samples.has_value()) {
    return std::string("--errors and --samples go together (hold-out evidence)");
  }
  if (train_errors.has_value() != train_samples.has_value()) {
    return std::string("--train-errors and --train-samples go together (training evidence)");
  }
  const int capacities = vc.has_value() + hyp.has_value() + log_hyp.has_value();
  if (capacities > 1) {
    return std::string(
        "give one capacity: --vc-dimension, --hypothesis-count or --log-hypothesis-count");
  }
  if (capacities == 1 && !train_errors.has_value()) {
    return std::string("a capacity needs training evidence (--train-errors/--train-samples)");
  }
  if (!errors.has_value() && !train_errors.has_value()) {
    return std::string("give evidence: --errors/--samples, or --train-errors/--train-samples "
                       "with a capacity, or --input FILE");
  }
  v1::Evidence* e = req->mutable_evidence();
  if (errors) {
    e->mutable_holdout()->set_error_count(*errors);
    e->mutable_holdout()->set_sample_count(*samples);
  }
  if (train_errors) {
    v1::TrainingEvidence* t = e->mutable_training();
    t->set_error_count(*train_errors);
    t->set_sample_count(*train_samples);
    if (vc) t->mutable_capacity()->set_vc_dimension(*vc);
    if (hyp) t->mutable_capacity()->set_hypothesis_count(*hyp);
    if (log_hyp) t->mutable_capacity()->set_log_hypothesis_count(*log_hyp);
  }
  if (baseline) e->set_baseline_error_rate(*baseline);
  req->set_failure_probability(delta.value_or(0.05));
  return std::nullopt;
}

// Applies --family and --weights. Returns a usage message on error.
std::optional<std::string> ApplyFamilies(const ParsedArgs& args, v1::CertifyRequest* req) {
  const std::vector<std::string> names = args.GetList("family");
  const std::vector<std::string> weights = args.GetList("weights");
  if (names.size() == 1 && names[0] == "all") {
    if (!weights.empty()) return std::string("--weights go with a list of families, not 'all'");
    req->mutable_all_applicable();
    return std::nullopt;
  }
  if (names.empty()) {
    if (!weights.empty()) return std::string("--weights need --family");
    return std::nullopt;
  }
  v1::FamilyList* list = req->mutable_listed();
  for (const std::string& name : names) {
    const core::FamilySpec* spec = core::FindFamilyBySlug(name);
    if (spec == nullptr) {
      std::vector<std::string> known;
      for (const core::FamilySpec& f : core::Families()) known.emplace_back(f.slug);
      return absl::StrCat("unknown family '", name, "'; known: ", absl::StrJoin(known, ", "),
                          ", or all");
    }
    list->add_families(static_cast<v1::BoundFamily>(spec->family));
  }
  for (const std::string& w : weights) {
    double v = 0;
    if (!absl::SimpleAtod(w, &v)) return absl::StrCat("--weights: '", w, "' is not a number");
    list->add_delta_weights(v);
  }
  return std::nullopt;
}

void PrintTable(const v1::CertifyResponse& r, std::ostream& out) {
  const double requested = r.delta_accounting().requested_failure_probability();
  out << absl::StrFormat("Certificates on the true error (requested confidence %g%%, delta = %g)\n\n",
                         100.0 * (1.0 - requested), requested);
  Table table({"family", "upper", "lower", "empirical", "penalty", "delta used", "vacuous"});
  for (const v1::Certificate& c : r.certificates()) {
    table.AddRow({c.family_name(), FormatProbability(c.risk_upper_bound()),
                  c.has_risk_lower_bound() ? FormatProbability(c.risk_lower_bound()) : "-",
                  FormatProbability(c.empirical_risk()), FormatProbability(c.penalty()),
                  absl::StrFormat("%.4g", c.failure_probability()), c.vacuous() ? "yes" : "no"});
  }
  out << table.Render() << "\n";
  const v1::Certificate& t = r.tightest();
  out << absl::StrFormat("Tightest: %s: true error <= %s with probability >= %g%s\n",
                         t.family_name(), FormatProbability(t.risk_upper_bound()),
                         1.0 - r.delta_accounting().spent_failure_probability(),
                         t.vacuous() ? " (vacuous: says nothing)" : "");
  out << "Delta accounting: " << r.delta_accounting().rule() << "\n";
  for (const v1::Certificate& c : r.certificates()) {
    for (const std::string& note : c.notes()) out << "Note (" << c.family_name() << "): " << note << "\n";
  }
  out << "\nCautions:\n";
  for (const std::string& caution : r.cautions()) out << "  - " << caution << "\n";
}

}  // namespace

int RunCertify(const std::vector<std::string>& args, std::ostream& out, std::ostream& err) {
  const std::vector<OptionSpec> specs = Specs();
  auto parsed = ParseArgs(specs, args);
  if (!parsed.ok()) return Usage(err, std::string(parsed.status().message()));
  if (parsed->Has("help")) {
    out << FormatHelp(kUsage, kSummary, specs);
    return kExitOk;
  }
  const std::string output = parsed->Get("output").value_or("table");
  if (output != "table" && output != "json") return Usage(err, "--output must be table or json");
  auto options = ClientOptionsFromArgs(*parsed);
  if (!options.ok()) return Usage(err, std::string(options.status().message()));

  v1::CertifyRequest request;
  if (auto input = parsed->Get("input")) {
    for (const char* flag : {"errors", "samples", "train-errors", "train-samples", "vc-dimension",
                             "hypothesis-count", "log-hypothesis-count", "baseline-error-rate",
                             "delta", "family", "weights"}) {
      if (parsed->Has(flag)) return Usage(err, absl::StrCat("--input excludes --", flag));
    }
    auto text = ReadInput(*input);
    if (!text.ok()) {
      err << "riskbound certify: " << text.status().message() << "\n";
      return kExitInvalidInput;
    }
    if (auto status = ParseJson(*text, *input, &request); !status.ok()) {
      err << "riskbound certify: " << status.message() << "\n";
      return kExitInvalidInput;
    }
  } else {
    if (auto problem = RequestFromFlags(*parsed, &request)) return Usage(err, *problem);
    if (auto problem = ApplyFamilies(*parsed, &request)) return Usage(err, *problem);
  }

  RiskBoundClient client(*options);
  v1::CertifyResponse response;
  const grpc::Status status = client.Certify(request, &response);
  if (!status.ok()) return ReportRpcError(status, client.options(), err);
  if (output == "json") {
    out << ToJson(response);
  } else {
    PrintTable(response, out);
  }
  return kExitOk;
}

}  // namespace riskbound::cli
