// riskbound certify: certificates on one model's true error.
#include <cmath>
#include <map>
#include <optional>
#include <string>
#include <vector>

#include "absl/strings/numbers.h"
#include "absl/strings/str_cat.h"
#include "absl/strings/str_format.h"
#include "absl/strings/str_join.h"
#include "client_cli/args.h"
#include "client_cli/client.h"
#include "client_cli/command_start.h"
#include "client_cli/commands.h"
#include "client_cli/exit_codes.h"
#include "client_cli/json_io.h"
#include "client_cli/model_flags.h"
#include "client_cli/table.h"
#include "service/core/families.h"

namespace riskbound::cli {
namespace {

constexpr char kUsage[] =
    "riskbound certify --errors K --samples N [--delta D] [--family NAME|all] [options]\n"
    "       riskbound certify --input request.json [options]";
constexpr char kSummary[] =
    "Asks the server for certificates: upper bounds on the model's true error that hold with\n"
    "probability >= 1 - delta. Give hold-out counts (--errors/--samples); training counts\n"
    "(--train-errors/--train-samples) with a capacity (--vc-dimension, --hypothesis-count,\n"
    "--log-hypothesis-count, or --model KIND with its parameter flags) or with --rademacher;\n"
    "a bounded loss (--mean-loss ...); a PAC-Bayes posterior (--kl-divergence ...); a\n"
    "compression scheme (--compression-size ...); any combination of them; or a whole\n"
    "riskbound.v1.CertifyRequest in the protobuf JSON mapping with --input (- for stdin).\n"
    "Without --family, one recommended family gets the whole delta; with several families\n"
    "(or 'all') each gets its share (union bound) and the tightest is reported.";

std::vector<OptionSpec> Specs() {
  std::vector<OptionSpec> specs = {
      {"errors", "K", "hold-out errors"},
      {"samples", "N", "hold-out examples"},
      {"train-errors", "K", "training errors"},
      {"train-samples", "M", "training examples"},
  };
  for (OptionSpec& s : CapacityOptions()) specs.push_back(s);
  for (OptionSpec& s : std::vector<OptionSpec>{
      {"baseline-error-rate", "P", "error rate of a trivial classifier; bounds at or above it are vacuous"},
      {"mean-loss", "X", "bounded loss: mean per-example loss on a hold-out set"},
      {"loss-variance", "V", "bounded loss: unbiased sample variance of the losses"},
      {"loss-samples", "N", "bounded loss: hold-out examples"},
      {"loss-range", "A,B", "bounded loss: range of every per-example loss (default 0,1)"},
      {"kl-divergence", "KL", "PAC-Bayes: KL(posterior || prior) in nats"},
      {"gibbs-risk", "R", "PAC-Bayes: empirical Gibbs risk of the posterior"},
      {"pac-samples", "M", "PAC-Bayes: training examples (not those the prior was fit on)"},
      {"bound-target", "gibbs|majority-vote", "PAC-Bayes: the classifier bounded (default gibbs)"},
      {"rademacher", "R", "empirical Rademacher complexity of the class (with --train-errors/--train-samples)"},
      {"sigma-draws", "N", "Rademacher: sigma draws the estimate averaged (default exact)"},
      {"compression-size", "D", "sample compression: size of the compression set"},
      {"compression-samples", "M", "sample compression: training examples"},
      {"outside-errors", "K", "sample compression: errors outside the compression set"},
      {"size-fixed", "", "sample compression: the set size was fixed before seeing the data"},
      {"delta", "D", "failure probability in (0,1) (default 0.05: 95% confidence)"},
      {"family", "NAME[,NAME]", "bound families (see `riskbound families`), or 'all'", true},
      {"weights", "W[,W]", "delta weights of the listed families, summing to <= 1"},
      {"input", "FILE", "read the request from a JSON file (- for stdin)"},
      {"output", "table|json", "output format (default table)"},
  }) {
    specs.push_back(s);
  }
  for (OptionSpec& s : ConnectionOptions()) specs.push_back(s);
  return specs;
}

// A usage problem: message on stderr, exit 2.
int Usage(std::ostream& err, const std::string& message) {
  return UsageError(err, "certify", message);
}

// The numeric flags of certify, read once. A usage message on error.
struct Flags {
  std::map<std::string, std::uint64_t> counts;
  std::map<std::string, double> reals;
  bool Has(const std::string& name) const { return counts.count(name) || reals.count(name); }
};

constexpr const char* kCountFlags[] = {"errors", "samples", "train-errors", "train-samples",
                                       "vc-dimension", "hypothesis-count", "loss-samples",
                                       "pac-samples", "sigma-draws", "compression-size",
                                       "compression-samples", "outside-errors"};
constexpr const char* kRealFlags[] = {"log-hypothesis-count", "baseline-error-rate", "delta",
                                      "mean-loss", "loss-variance", "kl-divergence",
                                      "gibbs-risk", "rademacher"};

std::optional<std::string> ReadFlags(const ParsedArgs& args, Flags* flags) {
  for (const char* name : kCountFlags) {
    auto v = args.GetUint64(name);
    if (!v.ok()) return std::string(v.status().message());
    if (v->has_value()) flags->counts[name] = **v;
  }
  for (const char* name : kRealFlags) {
    auto v = args.GetDouble(name);
    if (!v.ok()) return std::string(v.status().message());
    if (v->has_value()) flags->reals[name] = **v;
  }
  return std::nullopt;
}

// "--a, --b and --c go together (what)" unless all or none of them are given.
std::optional<std::string> Together(const Flags& f, const ParsedArgs& args,
                                    std::vector<std::string> names, const std::string& what) {
  int given = 0;
  for (const std::string& n : names) given += (f.Has(n) || args.Has(n)) ? 1 : 0;
  if (given == 0 || given == static_cast<int>(names.size())) return std::nullopt;
  for (std::string& n : names) n = "--" + n;
  return absl::StrCat(absl::StrJoin(names, ", "), " go together (", what, ")");
}

// Builds the request's evidence from the flags. Returns a usage message on error.
std::optional<std::string> RequestFromFlags(const ParsedArgs& args, v1::CertifyRequest* req) {
  Flags f;
  if (auto problem = ReadFlags(args, &f)) return problem;
  for (auto problem :
       {Together(f, args, {"errors", "samples"}, "hold-out evidence"),
        Together(f, args, {"train-errors", "train-samples"}, "training evidence"),
        Together(f, args, {"mean-loss", "loss-samples"}, "bounded-loss evidence"),
        Together(f, args, {"kl-divergence", "gibbs-risk", "pac-samples"}, "PAC-Bayes evidence"),
        Together(f, args, {"compression-size", "compression-samples", "outside-errors"},
                 "sample-compression evidence")}) {
    if (problem) return problem;
  }
  const int capacities = f.Has("vc-dimension") + f.Has("hypothesis-count") +
                         f.Has("log-hypothesis-count") + args.Has("model");
  if (capacities > 1) {
    return std::string("give one capacity: --vc-dimension, --hypothesis-count, "
                       "--log-hypothesis-count or --model");
  }
  if (AnyModelParameter(args) && !args.Has("model")) {
    return std::string("the model parameter flags (--dimension, --widths, ...) go with --model KIND");
  }
  const bool training = f.Has("train-errors");
  if ((capacities == 1 || f.Has("rademacher")) && !training) {
    return std::string("a capacity or --rademacher needs --train-errors/--train-samples");
  }
  if (training && capacities == 0 && !f.Has("rademacher")) {
    return std::string("training evidence needs a capacity (--vc-dimension, --hypothesis-count, "
                       "--log-hypothesis-count, --model) or --rademacher");
  }
  if ((f.Has("loss-variance") || args.Has("loss-range")) && !f.Has("mean-loss")) {
    return std::string("--loss-variance and --loss-range need --mean-loss/--loss-samples");
  }
  if (f.Has("sigma-draws") && !f.Has("rademacher")) return std::string("--sigma-draws needs --rademacher");
  if (args.Has("bound-target") && !f.Has("kl-divergence")) {
    return std::string("--bound-target needs PAC-Bayes evidence (--kl-divergence ...)");
  }
  if (args.Has("size-fixed") && !f.Has("compression-size")) {
    return std::string("--size-fixed needs --compression-size");
  }
  if (!f.Has("errors") && !training && !f.Has("mean-loss") && !f.Has("kl-divergence") &&
      !f.Has("compression-size")) {
    return std::string("give evidence: --errors/--samples, --train-errors/--train-samples with a "
                       "capacity or --rademacher, --mean-loss/--loss-samples, --kl-divergence/"
                       "--gibbs-risk/--pac-samples, --compression-size/--compression-samples/"
                       "--outside-errors, or --input FILE");
  }

  v1::Evidence* e = req->mutable_evidence();
  if (f.Has("errors")) {
    e->mutable_holdout()->set_error_count(f.counts["errors"]);
    e->mutable_holdout()->set_sample_count(f.counts["samples"]);
  }
  if (training && capacities == 1) {
    v1::TrainingEvidence* t = e->mutable_training();
    t->set_error_count(f.counts["train-errors"]);
    t->set_sample_count(f.counts["train-samples"]);
    if (f.Has("vc-dimension")) t->mutable_capacity()->set_vc_dimension(f.counts["vc-dimension"]);
    if (f.Has("hypothesis-count")) {
      t->mutable_capacity()->set_hypothesis_count(f.counts["hypothesis-count"]);
    }
    if (f.Has("log-hypothesis-count")) {
      t->mutable_capacity()->set_log_hypothesis_count(f.reals["log-hypothesis-count"]);
    }
    if (auto kind_word = args.Get("model")) {
      const std::optional<v1::ModelKind> kind = ModelKindFromName(*kind_word);
      if (!kind.has_value()) {
        return absl::StrCat("--model: unknown model kind '", *kind_word,
                            "'; kinds: ", ModelKindList());
      }
      if (auto problem = ModelFromFlags(*kind, args, t->mutable_capacity()->mutable_model())) {
        return problem;
      }
    }
  }
  if (f.Has("rademacher")) {
    v1::RademacherEvidence* r = e->mutable_rademacher();
    r->set_error_count(f.counts["train-errors"]);
    r->set_sample_count(f.counts["train-samples"]);
    r->set_empirical_rademacher(f.reals["rademacher"]);
    if (f.Has("sigma-draws")) r->set_sigma_draw_count(f.counts["sigma-draws"]);
  }
  if (f.Has("mean-loss")) {
    v1::BoundedLossEvidence* b = e->mutable_bounded_loss();
    b->set_mean_loss(f.reals["mean-loss"]);
    b->set_sample_count(f.counts["loss-samples"]);
    if (f.Has("loss-variance")) b->set_sample_variance(f.reals["loss-variance"]);
    if (args.Has("loss-range")) {
      const std::vector<std::string> range = args.GetList("loss-range");
      double lo = 0, hi = 0;
      if (range.size() != 2 || !absl::SimpleAtod(range[0], &lo) || !absl::SimpleAtod(range[1], &hi)) {
        return std::string("--loss-range: expected two numbers A,B");
      }
      b->set_loss_min(lo);
      b->set_loss_max(hi);
    }
  }
  if (f.Has("kl-divergence")) {
    v1::PacBayesEvidence* p = e->mutable_pac_bayes();
    p->set_kl_divergence(f.reals["kl-divergence"]);
    p->set_gibbs_empirical_risk(f.reals["gibbs-risk"]);
    p->set_sample_count(f.counts["pac-samples"]);
    const std::string target = args.Get("bound-target").value_or("gibbs");
    if (target == "gibbs") {
      p->set_target(v1::PAC_BAYES_TARGET_GIBBS);
    } else if (target == "majority-vote") {
      p->set_target(v1::PAC_BAYES_TARGET_MAJORITY_VOTE);
    } else {
      return std::string("--bound-target must be gibbs or majority-vote");
    }
  }
  if (f.Has("compression-size")) {
    v1::CompressionEvidence* k = e->mutable_compression();
    k->set_compression_size(f.counts["compression-size"]);
    k->set_sample_count(f.counts["compression-samples"]);
    k->set_outside_error_count(f.counts["outside-errors"]);
    k->set_size_fixed_in_advance(args.Has("size-fixed"));
  }
  if (f.Has("baseline-error-rate")) e->set_baseline_error_rate(f.reals["baseline-error-rate"]);
  req->set_failure_probability(f.Has("delta") ? f.reals["delta"] : 0.05);
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
  out << absl::StrFormat("Tightest: %s: %s <= %s with probability >= %g%s\n", t.family_name(),
                         t.has_loss_range() ? "expected loss" : "true error",
                         FormatProbability(t.risk_upper_bound()),
                         1.0 - r.delta_accounting().spent_failure_probability(),
                         t.vacuous() ? " (vacuous: says nothing)" : "");
  out << "Delta accounting: " << r.delta_accounting().rule() << "\n";
  for (const v1::Certificate& c : r.certificates()) {
    if (c.has_loss_range()) {
      out << absl::StrFormat("Note (%s): bounds on the expected loss, in the loss's units [%g, %g]\n",
                             c.family_name(), c.loss_range().loss_min(), c.loss_range().loss_max());
    }
    for (const std::string& note : c.notes()) out << "Note (" << c.family_name() << "): " << note << "\n";
  }
  PrintCautions(r.cautions(), out);
}

}  // namespace

int RunCertify(const std::vector<std::string>& args, std::ostream& out, std::ostream& err) {
  const std::vector<OptionSpec> specs = Specs();
  CommandStart start;
  if (auto code = StartCommand("certify", kUsage, kSummary, specs, args, out, err, &start)) {
    return *code;
  }

  v1::CertifyRequest request;
  if (auto input = start.args.Get("input")) {
    for (const OptionSpec& spec : specs) {
      if (spec.name != "input" && spec.name != "output" && spec.name != "server" &&
          spec.name != "timeout" && start.args.Has(spec.name)) {
        return Usage(err, absl::StrCat("--input excludes --", spec.name));
      }
    }
    if (auto code = LoadJsonInput("certify", *input, &request, err)) return *code;
  } else {
    if (auto problem = RequestFromFlags(start.args, &request)) return Usage(err, *problem);
    if (auto problem = ApplyFamilies(start.args, &request)) return Usage(err, *problem);
  }

  RiskBoundClient client(start.client);
  v1::CertifyResponse response;
  const grpc::Status status = client.Certify(request, &response);
  if (!status.ok()) return ReportRpcError(status, client.options(), err);
  if (start.json) {
    out << ToJson(response);
  } else {
    PrintTable(response, out);
  }
  return kExitOk;
}

}  // namespace riskbound::cli
