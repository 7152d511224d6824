// riskbound certify: certificates on one model's true error.
#include <algorithm>
#include <cmath>
#include <map>
#include <optional>
#include <string>
#include <vector>

#include "absl/strings/ascii.h"
#include "absl/strings/numbers.h"
#include "absl/strings/str_cat.h"
#include "absl/strings/str_format.h"
#include "absl/strings/str_join.h"
#include "client_cli/args.h"
#include "client_cli/client.h"
#include "client_cli/command_start.h"
#include "client_cli/commands.h"
#include "client_cli/exit_codes.h"
#include "client_cli/shared_flags.h"
#include "client_cli/json_io.h"
#include "client_cli/model_flags.h"
#include "client_cli/names.h"
#include "client_cli/slices_file.h"
#include "client_cli/format.h"
#include "client_cli/table.h"

namespace riskbound::cli {

// Applies --families and --delta-weights. Returns a usage message on error.
std::optional<std::string> ApplyFamilies(const ParsedArgs& args, v1::CertifyRequest* req) {
  const std::vector<std::string> names = args.GetList("families");
  const std::vector<std::string> weights = args.GetList("delta-weights");
  if (names.size() == 1 && names[0] == "all") {
    if (!weights.empty()) return std::string("--delta-weights go with a list of families, not 'all'");
    req->mutable_all_applicable();
    return std::nullopt;
  }
  if (names.empty()) {
    if (!weights.empty()) return std::string("--delta-weights need --families");
    return std::nullopt;
  }
  v1::FamilyList* list = req->mutable_listed();
  for (const std::string& name : names) {
    const std::optional<v1::BoundFamily> family = FamilyFromName(name);
    if (!family.has_value()) return absl::StrCat(UnknownFamilyMessage(name), ", or all");
    list->add_families(*family);
  }
  for (const std::string& w : weights) {
    double v = 0;
    if (!absl::SimpleAtod(w, &v)) return absl::StrCat("--delta-weights: '", w, "' is not a number");
    list->add_delta_weights(v);
  }
  return std::nullopt;
}

namespace {

constexpr char kUsage[] =
    "riskbound certify --holdout-error-count K --holdout-sample-count N\n"
    "                  [--failure-probability D] [--families NAME[,NAME]|all] [options]\n"
    "       riskbound certify --errors K --samples N [--delta D] [--family NAME]   (short aliases)\n"
    "       riskbound certify --slices slices.csv [--slice-sharing bonferroni|sidak] [...]\n"
    "       riskbound certify --input request.json [options]";
constexpr char kSummary[] =
    "Asks the server for certificates: upper bounds on the model's true error (or, for a\n"
    "bounded loss, on its expected loss in the loss's units) that hold with probability\n"
    ">= 1 - failure_probability. Give hold-out counts (--holdout-error-count/\n"
    "--holdout-sample-count); training counts (--training-error-count/--training-sample-count)\n"
    "with a capacity (--vc-dimension, --hypothesis-count, --log-hypothesis-count, or --model\n"
    "KIND with its parameter flags) or with --empirical-rademacher; a bounded loss (--mean-loss\n"
    "...); a PAC-Bayes posterior (--kl-divergence ...); a compression scheme\n"
    "(--compression-size ...); any combination of them; or a whole riskbound.v1.CertifyRequest\n"
    "in the protobuf JSON mapping with --input (- for stdin), the only way to send raw\n"
    "relabel-and-retrain draws (evidence.relabel, docs/capacity-from-data.md). --slices FILE\n"
    "adds per-slice hold-out counts (evidence.slices, CSV or JSON, docs/slices.md): a\n"
    "certificate per slice, worst first, and the worst-slice statement, the slices sharing\n"
    "their delta by --slice-sharing bonferroni|sidak (slice_sharing.rule). Each flag is\n"
    "named after its field of the request (evidence.holdout.error_count ->\n"
    "--holdout-error-count); the older spellings (listed as \"also\") still work. Families are\n"
    "named by their CLI word (holdout-kl) or their enum name (BOUND_FAMILY_HOLDOUT_KL_CHERNOFF,\n"
    "holdout_kl_chernoff). Without --families, one recommended family gets the whole failure\n"
    "probability; with several (or 'all': every family that applies, except holdout-anytime,\n"
    "which is never the tightest) each gets its share (union bound) and the tightest is\n"
    "reported.\n"
    "\n"
    "Printed numbers round outward: upper bounds up, lower bounds and confidence levels down,\n"
    "failure probabilities up (the JSON output carries the exact values).\n"
    "\n"
    "exit codes: 0 answered; 2 usage; 3 invalid input (field named); 4 server unreachable;\n"
    "7 refused for the server's limits; 1 other failure.";

constexpr char kTerms[] =
    "  upper            upper bound on the true error (expected loss for a bounded loss) that\n"
    "                   holds with probability >= 1 - delta used; rounded up\n"
    "  lower            lower bound, where the family gives one; rounded down\n"
    "  empirical        the observed error rate (or mean loss) the bound starts from\n"
    "  penalty          upper minus empirical: what the bound adds for finite samples and\n"
    "                   capacity\n"
    "  delta used       the failure probability this family spent: its bound may be wrong\n"
    "                   with at most this probability (rounded up)\n"
    "  delta, failure probability\n"
    "                   the probability, over the draw of the samples, that a bound is wrong;\n"
    "                   the confidence is 1 - delta\n"
    "  union bound      several bounds hold together with probability >= 1 - (sum of their\n"
    "                   deltas), so the requested delta is split between the families\n"
    "  vacuous          the bound is at or above the baseline error rate (or 1): it says nothing\n"
    "  heuristic        an estimate, not a bound: a condition of the bound is not met (relabel\n"
    "                   draws from approximate training, evidence.relabel.training)\n"
    "  tightest         the family with the smallest upper bound; every bound in the table\n"
    "                   holds at once, so reporting the smallest costs nothing extra\n"
    "  capacity         how rich the model class is (VC dimension, ln |H|): more capacity,\n"
    "                   larger penalty\n";

std::vector<OptionSpec> Specs() {
  std::vector<OptionSpec> specs = {
      {"holdout-error-count", "K", "hold-out errors (evidence.holdout.error_count)", false,
       {"errors"}},
      {"holdout-sample-count", "N", "hold-out examples (evidence.holdout.sample_count)", false,
       {"samples"}},
      {"training-error-count", "K", "training errors (evidence.training.error_count)", false,
       {"train-errors"}},
      {"training-sample-count", "M", "training examples (evidence.training.sample_count)", false,
       {"train-samples"}},
  };
  for (OptionSpec& s : CapacityOptions()) specs.push_back(s);
  for (OptionSpec& s : std::vector<OptionSpec>{
      {"baseline-error-rate", "P", "error rate of a trivial classifier; bounds at or above it are "
                                   "vacuous (evidence.baseline_error_rate)"},
      {"mean-loss", "X", "bounded loss: mean per-example loss on a hold-out set "
                         "(evidence.bounded_loss.mean_loss)"},
      {"sample-variance", "V", "bounded loss: unbiased sample variance of the losses "
                               "(evidence.bounded_loss.sample_variance)", false, {"loss-variance"}},
      {"loss-sample-count", "N", "bounded loss: hold-out examples "
                                 "(evidence.bounded_loss.sample_count)", false, {"loss-samples"}},
      {"loss-range", "A,B", "bounded loss: range of every per-example loss, default 0,1 "
                            "(evidence.bounded_loss.loss_min, loss_max)"},
      {"kl-divergence", "KL", "PAC-Bayes: KL(posterior || prior) in nats "
                              "(evidence.pac_bayes.kl_divergence)"},
      {"gibbs-empirical-risk", "R", "PAC-Bayes: empirical Gibbs risk of the posterior "
                                    "(evidence.pac_bayes.gibbs_empirical_risk)", false,
       {"gibbs-risk"}},
      {"pac-bayes-sample-count", "M", "PAC-Bayes: training examples, not those the prior was fit "
                                      "on (evidence.pac_bayes.sample_count)", false,
       {"pac-samples"}},
      {"pac-bayes-target", "gibbs|majority-vote", "PAC-Bayes: the classifier bounded, default "
                                                  "gibbs (evidence.pac_bayes.target)", false,
       {"bound-target"}},
      {"empirical-rademacher", "R", "empirical Rademacher complexity of the class, with the "
                                    "training counts (evidence.rademacher.empirical_rademacher)",
       false, {"rademacher"}},
      {"sigma-draw-count", "N", "Rademacher: sigma draws the estimate averaged, default exact "
                                "(evidence.rademacher.sigma_draw_count)", false, {"sigma-draws"}},
      {"compression-size", "D", "sample compression: size of the compression set "
                                "(evidence.compression.compression_size)"},
      {"compression-sample-count", "M", "sample compression: training examples "
                                        "(evidence.compression.sample_count)", false,
       {"compression-samples"}},
      {"outside-error-count", "K", "sample compression: errors outside the compression set "
                                   "(evidence.compression.outside_error_count)", false,
       {"outside-errors"}},
      {"size-fixed-in-advance", "", "sample compression: the set size was fixed before seeing "
                                    "the data (evidence.compression.size_fixed_in_advance)",
       false, {"size-fixed"}},
      {"failure-probability", "D", "delta: failure probability in (0,1), default 0.05, i.e. "
                                   "confidence 0.95 (failure_probability)", false, {"delta"}},
      {"families", "NAME[,NAME]", "bound families (see `riskbound families`), or 'all' "
                                  "(listed.families, all_applicable)", true, {"family"}},
      {"delta-weights", "W[,W]", "shares of delta of the listed families, summing to <= 1 "
                                 "(listed.delta_weights)", false, {"weights"}},
  }) {
    specs.push_back(s);
  }
  for (OptionSpec& s : SliceFlagSpecs()) specs.push_back(s);
  specs.push_back({"input", "FILE", "read the request from a JSON file (- for stdin)"});
  specs.push_back({"output", "table|json", "output format (default table)"});
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

constexpr const char* kCountFlags[] = {"holdout-error-count", "holdout-sample-count", "training-error-count", "training-sample-count",
                                       "vc-dimension", "hypothesis-count", "loss-sample-count",
                                       "pac-bayes-sample-count", "sigma-draw-count", "compression-size",
                                       "compression-sample-count", "outside-error-count"};
constexpr const char* kRealFlags[] = {"log-hypothesis-count", "baseline-error-rate", "failure-probability",
                                      "mean-loss", "sample-variance", "kl-divergence",
                                      "gibbs-empirical-risk", "empirical-rademacher"};

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
       {Together(f, args, {"holdout-error-count", "holdout-sample-count"}, "hold-out evidence"),
        Together(f, args, {"training-error-count", "training-sample-count"}, "training evidence"),
        Together(f, args, {"mean-loss", "loss-sample-count"}, "bounded-loss evidence"),
        Together(f, args, {"kl-divergence", "gibbs-empirical-risk", "pac-bayes-sample-count"}, "PAC-Bayes evidence"),
        Together(f, args, {"compression-size", "compression-sample-count", "outside-error-count"},
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
  const bool training = f.Has("training-error-count");
  if ((capacities == 1 || f.Has("empirical-rademacher")) && !training) {
    return std::string("a capacity or --empirical-rademacher needs --training-error-count/--training-sample-count");
  }
  if (training && capacities == 0 && !f.Has("empirical-rademacher")) {
    return std::string("training evidence needs a capacity (--vc-dimension, --hypothesis-count, "
                       "--log-hypothesis-count, --model) or --empirical-rademacher");
  }
  if ((f.Has("sample-variance") || args.Has("loss-range")) && !f.Has("mean-loss")) {
    return std::string("--sample-variance and --loss-range need --mean-loss/--loss-sample-count");
  }
  if (f.Has("sigma-draw-count") && !f.Has("empirical-rademacher")) return std::string("--sigma-draw-count needs --empirical-rademacher");
  if (args.Has("pac-bayes-target") && !f.Has("kl-divergence")) {
    return std::string("--pac-bayes-target needs PAC-Bayes evidence (--kl-divergence ...)");
  }
  if (args.Has("size-fixed-in-advance") && !f.Has("compression-size")) {
    return std::string("--size-fixed-in-advance needs --compression-size");
  }
  if (!f.Has("holdout-error-count") && !training && !f.Has("mean-loss") && !f.Has("kl-divergence") &&
      !f.Has("compression-size") && !args.Has("slices")) {
    return std::string("give evidence: --holdout-error-count/--holdout-sample-count, --training-error-count/--training-sample-count with a "
                       "capacity or --empirical-rademacher, --mean-loss/--loss-sample-count, --kl-divergence/"
                       "--gibbs-empirical-risk/--pac-bayes-sample-count, --compression-size/--compression-sample-count/"
                       "--outside-error-count, --slices FILE, or --input FILE");
  }
  if (args.Has("slice-sharing") && !args.Has("slices")) {
    return std::string("--slice-sharing needs --slices FILE");
  }

  v1::Evidence* e = req->mutable_evidence();
  if (f.Has("holdout-error-count")) {
    e->mutable_holdout()->set_error_count(f.counts["holdout-error-count"]);
    e->mutable_holdout()->set_sample_count(f.counts["holdout-sample-count"]);
  }
  if (training && capacities == 1) {
    v1::TrainingEvidence* t = e->mutable_training();
    t->set_error_count(f.counts["training-error-count"]);
    t->set_sample_count(f.counts["training-sample-count"]);
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
  if (f.Has("empirical-rademacher")) {
    v1::RademacherEvidence* r = e->mutable_rademacher();
    r->set_error_count(f.counts["training-error-count"]);
    r->set_sample_count(f.counts["training-sample-count"]);
    r->set_empirical_rademacher(f.reals["empirical-rademacher"]);
    if (f.Has("sigma-draw-count")) r->set_sigma_draw_count(f.counts["sigma-draw-count"]);
  }
  if (f.Has("mean-loss")) {
    v1::BoundedLossEvidence* b = e->mutable_bounded_loss();
    b->set_mean_loss(f.reals["mean-loss"]);
    b->set_sample_count(f.counts["loss-sample-count"]);
    if (f.Has("sample-variance")) b->set_sample_variance(f.reals["sample-variance"]);
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
    p->set_gibbs_empirical_risk(f.reals["gibbs-empirical-risk"]);
    p->set_sample_count(f.counts["pac-bayes-sample-count"]);
    // The CLI word or the enum name (PAC_BAYES_TARGET_MAJORITY_VOTE).
    const std::string target =
        EnumWord(absl::AsciiStrToUpper(args.Get("pac-bayes-target").value_or("gibbs")),
                 "PAC_BAYES_TARGET_");
    if (target == "gibbs") {
      p->set_target(v1::PAC_BAYES_TARGET_GIBBS);
    } else if (target == "majority-vote") {
      p->set_target(v1::PAC_BAYES_TARGET_MAJORITY_VOTE);
    } else {
      return std::string("--pac-bayes-target must be gibbs or majority-vote");
    }
  }
  if (f.Has("compression-size")) {
    v1::CompressionEvidence* k = e->mutable_compression();
    k->set_compression_size(f.counts["compression-size"]);
    k->set_sample_count(f.counts["compression-sample-count"]);
    k->set_outside_error_count(f.counts["outside-error-count"]);
    k->set_size_fixed_in_advance(args.Has("size-fixed-in-advance"));
  }
  if (f.Has("baseline-error-rate")) e->set_baseline_error_rate(f.reals["baseline-error-rate"]);
  req->set_failure_probability(f.Has("failure-probability") ? f.reals["failure-probability"] : 0.05);
  return std::nullopt;
}


// The slices' certificates, worst first, the worst-slice statement and the
// share rule.
void PrintSlices(const v1::CertifyRequest& req, const v1::SliceSummary& s, std::ostream& out) {
  std::map<std::string, const v1::SliceEvidence*> counts;
  for (const v1::SliceEvidence& e : req.evidence().slices()) counts[e.name()] = &e;
  std::vector<const v1::SliceCertificate*> rows;
  for (const v1::SliceCertificate& c : s.slice_certificates()) rows.push_back(&c);
  // Worst first (the server's order; kept here whatever the server sends).
  std::stable_sort(rows.begin(), rows.end(), [](const auto* a, const auto* b) {
    if (a->certificate().risk_upper_bound() != b->certificate().risk_upper_bound()) {
      return a->certificate().risk_upper_bound() > b->certificate().risk_upper_bound();
    }
    return a->slice_name() < b->slice_name();
  });
  out << "Slices, worst first (hold-out exact binomial, one certificate per slice):\n\n";
  Table table({"slice_name", "error_count", "sample_count", "empirical", "upper", "lower",
               "failure_probability"});
  for (const v1::SliceCertificate* row : rows) {
    const v1::Certificate& c = row->certificate();
    const auto it = counts.find(row->slice_name());  // the counts as sent
    table.AddRow({row->slice_name(),
                  it == counts.end() ? "-" : absl::StrCat(it->second->error_count()),
                  it == counts.end() ? "-" : absl::StrCat(it->second->sample_count()),
                  FormatObserved(c.empirical_risk()),
                  FormatUpper(c.risk_upper_bound()),
                  c.has_risk_lower_bound() ? FormatLower(c.risk_lower_bound()) : "-",
                  FormatFailureProbability(c.failure_probability())});
  }
  out << table.Render() << "\n";
  out << absl::StrFormat("Worst slice: %s, true error <= %s\n", s.worst_slice_name(),
                         FormatUpper(s.worst_slice_upper_bound()));
  out << "Statement: " << s.statement() << "\n";
  out << absl::StrFormat("Share rule: %s; the slices spent %s of their %s\n",
                         SliceShareRuleWord(s.rule()),
                         FormatFailureProbability(s.spent_failure_probability()),
                         FormatFailureProbability(s.failure_probability()));
}

void PrintTable(const v1::CertifyRequest& req, const v1::CertifyResponse& r, std::ostream& out) {
  if (r.certificates_size() == 0 && r.has_slices()) {
    const double requested = r.delta_accounting().requested_failure_probability();
    out << absl::StrFormat("Slice certificates (requested: confidence >= %s, delta = %s)\n\n",
                           FormatConfidence(requested), FormatInput(requested));
    PrintSlices(req, r.slices(), out);
    PrintCautions(r.cautions(), out);
    return;
  }
  const double requested = r.delta_accounting().requested_failure_probability();
  int loss_count = 0;
  for (const v1::Certificate& c : r.certificates()) loss_count += c.has_loss_range() ? 1 : 0;
  std::string what = "Upper bounds on the true error rate";
  if (loss_count == r.certificates_size() && loss_count > 0) {
    what = "Upper bounds on the expected loss, in the loss's units";
  } else if (loss_count > 0) {
    what = "Upper bounds on the true error rate, and on the expected loss in the loss's units "
           "for the bounded-loss families";
  }
  out << absl::StrFormat("%s (requested: confidence >= %s, delta = %s)\n\n", what,
                         FormatConfidence(requested), FormatInput(requested));
  Table table({"family", "upper", "lower", "empirical", "penalty", "delta used", "vacuous"});
  for (const v1::Certificate& c : r.certificates()) {
    table.AddRow({c.heuristic() ? c.family_name() + " (heuristic)" : c.family_name(),
                  FormatUpper(c.risk_upper_bound()),
                  c.has_risk_lower_bound() ? FormatLower(c.risk_lower_bound()) : "-",
                  FormatObserved(c.empirical_risk()), FormatUpper(c.penalty()),
                  FormatFailureProbability(c.failure_probability()), c.vacuous() ? "yes" : "no"});
  }
  out << table.Render() << "\n";
  const v1::Certificate& t = r.tightest();
  out << absl::StrFormat("Tightest: %s: %s <= %s with probability >= %s%s\n", t.family_name(),
                         t.has_loss_range() ? "expected loss" : "true error",
                         FormatUpper(t.risk_upper_bound()),
                         FormatConfidence(r.delta_accounting().spent_failure_probability()),
                         t.vacuous() ? " (vacuous: says nothing)" : "");
  if (t.heuristic()) {
    out << "HEURISTIC: the tightest row is an estimate, not a bound (its evidence came from "
           "approximate training); no certificate above is a guarantee a gate accepts\n";
  } else {
    for (const v1::Certificate& c : r.certificates()) {
      if (c.heuristic()) {
        out << "HEURISTIC: " << c.family_name()
            << " is an estimate, not a bound (approximate training); it is never the "
               "tightest\n";
      }
    }
  }
  out << "Delta accounting: " << r.delta_accounting().rule() << "\n";
  for (const v1::Certificate& c : r.certificates()) {
    if (c.has_loss_range()) {
      out << absl::StrFormat(
          "Note (%s): bounds on the expected loss, in the loss's units [%s, %s]\n",
          c.family_name(), FormatInput(c.loss_range().loss_min()),
          FormatInput(c.loss_range().loss_max()));
    }
    for (const std::string& note : c.notes()) out << "Note (" << c.family_name() << "): " << note << "\n";
  }
  if (r.has_slices()) {
    out << "\n";
    PrintSlices(req, r.slices(), out);
  }
  PrintCautions(r.cautions(), out);
}

}  // namespace

int RunCertify(const std::vector<std::string>& args, std::ostream& out, std::ostream& err) {
  const std::vector<OptionSpec> specs = Specs();
  CommandStart start;
  if (auto code =
          StartCommand("certify", kUsage, kSummary, specs, args, out, err, &start, kTerms)) {
    return *code;
  }

  v1::CertifyRequest request;
  if (auto input = start.args.Get("input")) {
    // The file is the whole request: flags that set its fields are refused;
    // --output and the connection flags (ConnectionOptions) are not fields.
    std::vector<std::string> allowed = {"input", "output"};
    for (const OptionSpec& c : ConnectionOptions()) allowed.push_back(c.name);
    for (const OptionSpec& spec : specs) {
      if (std::find(allowed.begin(), allowed.end(), spec.name) == allowed.end() &&
          start.args.Has(spec.name)) {
        return Usage(err, absl::StrCat("--input excludes --", spec.name));
      }
    }
    if (auto code = LoadJsonInput("certify", *input, &request, err)) return *code;
  } else {
    if (auto problem = RequestFromFlags(start.args, &request)) return Usage(err, *problem);
    if (auto problem = ApplyFamilies(start.args, &request)) return Usage(err, *problem);
    SliceFlags slices;
    if (auto code = ReadSliceFlags("certify", start.args, &slices, err)) return *code;
    if (slices.file.has_value()) {
      for (const v1::SliceEvidence& s : slices.file->slices) {
        *request.mutable_evidence()->add_slices() = s;
      }
      if (slices.file->has_max_risk) {
        err << "riskbound certify: note: the max_risk column of " << *start.args.Get("slices")
            << " is read by `riskbound gate` only (per-slice limits); certify ignores it\n";
      }
    }
    if (slices.rule.has_value()) request.mutable_slice_sharing()->set_rule(*slices.rule);
  }

  RiskBoundClient client(start.client);
  v1::CertifyResponse response;
  const grpc::Status status = client.Certify(request, &response);
  if (!status.ok()) return ReportRpcError(status, client.options(), err);
  if (start.json) {
    out << ToJson(response);
  } else {
    PrintTable(request, response, out);
  }
  return kExitOk;
}

}  // namespace riskbound::cli
