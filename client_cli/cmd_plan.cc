// riskbound plan holdout|training: sample-size planning.
#include <cstdint>
#include <optional>
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
#include "client_cli/json_io.h"
#include "client_cli/model_flags.h"
#include "client_cli/names.h"
#include "client_cli/format.h"
#include "client_cli/table.h"

namespace riskbound::cli {
namespace {

constexpr char kExitText[] =
    "exit codes: 0 the target is reachable (plan printed); 5 the target is unreachable (the\n"
    "answer, with reachable=false and the reason, is still printed; the reason also goes to\n"
    "stderr); 2 usage; 3 invalid input (field named); 4 server unreachable.";

constexpr char kPlanUsage[] =
    "riskbound plan holdout --target-risk E --expected-risk P [--failure-probability D]\n"
    "                       [--pass-probability Q] [--held-sample-count N] [--output table|json]\n"
    "       riskbound plan training --expected-empirical-risk R --target-risk E\n"
    "                       (--vc-dimension H | --hypothesis-count N | --log-hypothesis-count X |\n"
    "                        --model KIND ...) [--family NAME] [--failure-probability D]\n"
    "                       [--held-sample-count M] [--output table|json]";

constexpr char kHoldoutUsage[] =
    "riskbound plan holdout --target-risk E --expected-risk P [--failure-probability D]\n"
    "                       [--pass-probability Q] [--held-sample-count N] [--output table|json]";
constexpr char kHoldoutSummary[] =
    "How many hold-out examples make the exact binomial (Clopper-Pearson) certificate reach the\n"
    "target risk E at failure probability D, for a model whose true error rate is expected to be\n"
    "P. Without --pass-probability: the smallest n at which ceil(P n) errors still certify E (and\n"
    "keep doing so for ceil(2/P) more samples). With --pass-probability Q: the smallest n at which\n"
    "such a model passes with probability >= Q (a power calculation; recommended, since the\n"
    "observed error count scatters around P n). Also printed: the errors the set may show and\n"
    "still certify, the zero-failure size ceil(ln D / ln(1 - E)), and with --held-sample-count how\n"
    "many more examples to collect.";

constexpr char kTrainingUsage[] =
    "riskbound plan training --expected-empirical-risk R --target-risk E (--vc-dimension H |\n"
    "                        --hypothesis-count N | --log-hypothesis-count X | --model KIND ...)\n"
    "                        [--family NAME] [--failure-probability D] [--held-sample-count M]\n"
    "                        [--output table|json]";
constexpr char kTrainingSummary[] =
    "How many training examples make a training-set bound (vc-additive, vc-relative,\n"
    "occam-hoeffding, occam-kl) reach the target risk E at failure probability D, if the model\n"
    "keeps a training error rate of R: the smallest m at which the bound at ceil(R m) errors is\n"
    "<= E, by exact integer search over the bound itself. Default family: vc-additive with a VC\n"
    "dimension or --model, occam-kl with a hypothesis count. Printed beside it, FOR COMPARISON\n"
    "ONLY, the classical realizable (Blumer et al. 1989) and agnostic sample complexities: they\n"
    "answer different questions and are not plans for this bound.";

constexpr char kHoldoutTerms[] =
    "  delta, failure probability\n"
    "                     the probability, over the draw of the hold-out set, that the\n"
    "                     certificate is wrong; the confidence is 1 - delta\n"
    "  errors tolerated   the most errors the planned set may show and still certify the target\n"
    "  P(pass)            the probability that a model whose true error is the expected rate\n"
    "                     passes at the planned size (exact binomial sum; rounded down)\n"
    "  size if no error at all occurs\n"
    "                     the size at which zero errors certify the target\n"
    "  additional         planned size minus --held-sample-count\n";

constexpr char kTrainingTerms[] =
    "  delta, failure probability\n"
    "                     the probability, over the draw of the training set, that the bound\n"
    "                     is wrong; the confidence is 1 - delta\n"
    "  capacity           how rich the model class is (VC dimension, ln |H|): more capacity,\n"
    "                     more examples needed\n"
    "  for comparison only\n"
    "                     classical sample complexities that answer other questions; not plans\n"
    "                     for this bound\n"
    "  additional         planned size minus --held-sample-count\n";

std::vector<OptionSpec> HoldoutSpecs() {
  std::vector<OptionSpec> specs = {
      {"target-risk", "E", "the risk the certificate must reach, in (0,1); required "
                           "(holdout.target_risk)"},
      {"expected-risk", "P", "the error rate you expect the model to show, in [0,1]; required "
                             "(holdout.expected_risk)"},
      {"failure-probability", "D", "delta: failure probability in (0,1), default 0.05 "
                                   "(holdout.failure_probability)", false, {"delta"}},
      {"pass-probability", "Q", "plan for this probability of passing, in (0,1) "
                                "(holdout.pass_probability)"},
      {"held-sample-count", "N", "hold-out examples you already have (holdout.held_sample_count)",
       false, {"samples-held"}},
      {"output", "table|json", "output format (default table)"},
  };
  for (OptionSpec& s : ConnectionOptions()) specs.push_back(s);
  return specs;
}

std::vector<OptionSpec> TrainingSpecs() {
  std::vector<OptionSpec> specs = {
      {"expected-empirical-risk", "R", "the training error rate you expect, in [0,1]; required "
                                       "(training.expected_empirical_risk)", false,
       {"expected-risk"}},
      {"target-risk", "E", "the risk the bound must reach, in (0,1); required "
                           "(training.target_risk)"},
      {"family", "NAME", "vc-additive, vc-relative, occam-hoeffding or occam-kl, or the enum "
                         "name (training.family)"},
  };
  for (OptionSpec& s : CapacityOptions()) specs.push_back(s);
  for (OptionSpec& s : std::vector<OptionSpec>{
      {"failure-probability", "D", "delta: failure probability in (0,1), default 0.05 "
                                   "(training.failure_probability)", false, {"delta"}},
      {"held-sample-count", "M", "training examples you already have "
                                 "(training.held_sample_count)", false, {"samples-held"}},
      {"output", "table|json", "output format (default table)"},
  }) {
    specs.push_back(s);
  }
  for (OptionSpec& s : ConnectionOptions()) specs.push_back(s);
  return specs;
}

int Usage(std::ostream& err, const std::string& sub, const std::string& message) {
  return UsageError(err, sub.empty() ? "plan" : absl::StrCat("plan ", sub), message);
}

// Reads a required or optional real flag into `out`. A usage message on error.
std::optional<std::string> Real(const ParsedArgs& args, const std::string& name, bool required,
                                std::optional<double>* out) {
  auto v = args.GetDouble(name);
  if (!v.ok()) return std::string(v.status().message());
  if (!v->has_value() && required) return absl::StrCat("--", name, " is required");
  *out = *v;
  return std::nullopt;
}

std::optional<std::string> HoldoutFromFlags(const ParsedArgs& args, v1::HoldoutPlanRequest* r) {
  std::optional<double> target, expected, delta, pass;
  for (auto problem : {Real(args, "target-risk", true, &target),
                       Real(args, "expected-risk", true, &expected),
                       Real(args, "failure-probability", false, &delta),
                       Real(args, "pass-probability", false, &pass)}) {
    if (problem) return problem;
  }
  auto held = args.GetUint64("held-sample-count");
  if (!held.ok()) return std::string(held.status().message());
  r->set_target_risk(*target);
  r->set_expected_risk(*expected);
  r->set_failure_probability(delta.value_or(0.05));
  if (pass.has_value()) r->set_pass_probability(*pass);
  if (held->has_value()) r->set_held_sample_count(**held);
  return std::nullopt;
}

std::optional<std::string> TrainingFromFlags(const ParsedArgs& args, v1::TrainingPlanRequest* r) {
  std::optional<double> target, expected, delta, log_count;
  for (auto problem : {Real(args, "target-risk", true, &target),
                       Real(args, "expected-empirical-risk", true, &expected),
                       Real(args, "failure-probability", false, &delta),
                       Real(args, "log-hypothesis-count", false, &log_count)}) {
    if (problem) return problem;
  }
  auto held = args.GetUint64("held-sample-count");
  if (!held.ok()) return std::string(held.status().message());
  auto vc = args.GetUint64("vc-dimension");
  if (!vc.ok()) return std::string(vc.status().message());
  auto count = args.GetUint64("hypothesis-count");
  if (!count.ok()) return std::string(count.status().message());
  const int capacities = vc->has_value() + count->has_value() + log_count.has_value() +
                         args.Has("model");
  if (capacities != 1) {
    return std::string("give one capacity: --vc-dimension, --hypothesis-count, "
                       "--log-hypothesis-count or --model KIND");
  }
  if (AnyModelParameter(args) && !args.Has("model")) {
    return std::string("the model parameter flags (--dimension, --layer-widths, ...) go with --model KIND");
  }
  v1::Capacity* cap = r->mutable_capacity();
  if (vc->has_value()) cap->set_vc_dimension(**vc);
  if (count->has_value()) cap->set_hypothesis_count(**count);
  if (log_count.has_value()) cap->set_log_hypothesis_count(*log_count);
  if (auto kind_word = args.Get("model")) {
    const std::optional<v1::ModelKind> kind = ModelKindFromName(*kind_word);
    if (!kind.has_value()) {
      return absl::StrCat("--model: unknown model kind '", *kind_word, "'; kinds: ",
                          ModelKindList());
    }
    if (auto problem = ModelFromFlags(*kind, args, cap->mutable_model())) return problem;
  }
  const bool finite = count->has_value() || log_count.has_value();
  const std::string family = args.Get("family").value_or(finite ? "occam-kl" : "vc-additive");
  const std::optional<v1::BoundFamily> spec = FamilyFromName(family);
  if (!spec.has_value()) {
    return absl::StrCat("unknown family '", family,
                        "'; training plans use vc-additive, vc-relative, occam-hoeffding or "
                        "occam-kl");
  }
  r->set_family(*spec);
  r->set_target_risk(*target);
  r->set_expected_empirical_risk(*expected);
  r->set_failure_probability(delta.value_or(0.05));
  if (held->has_value()) r->set_held_sample_count(**held);
  return std::nullopt;
}

std::string Count(std::uint64_t n) { return absl::StrFormat("%d", n); }

void PrintNotesAndCautions(const v1::PlanSamplesResponse& r, std::ostream& out) {
  if (!r.rule().empty()) out << "Rule: " << r.rule() << "\n";
  for (const std::string& note : r.notes()) out << "Note: " << note << "\n";
  PrintCautions(r.cautions(), out);
}

void PrintHoldout(const v1::HoldoutPlanRequest& q, const v1::PlanSamplesResponse& r,
                  std::ostream& out) {
  out << absl::StrFormat(
      "Hold-out plan: exact binomial certificate <= %s at delta = %s, expected error rate %s%s\n\n",
      FormatInput(q.target_risk()), FormatInput(q.failure_probability()),
      FormatInput(q.expected_risk()),
      q.has_pass_probability()
          ? absl::StrFormat(", pass probability >= %s", FormatInput(q.pass_probability()))
          : "");
  const v1::HoldoutPlanDetail& d = r.holdout();
  Table t({"figure", "value"});
  if (r.reachable()) {
    t.AddRow({"hold-out examples needed", Count(r.sample_count())});
    t.AddRow({"errors tolerated at that size", Count(d.tolerated_error_count())});
    t.AddRow({"P(pass) at that size, true error = expected",
              FormatFixed(d.pass_probability_at_plan(), 4, Rounding::kDown)});
    t.AddRow({"size at the expected error count", Count(d.expected_rate_sample_count())});
    if (d.has_pass_probability_sample_count()) {
      t.AddRow({"size for the pass probability", Count(d.pass_probability_sample_count())});
    }
    if (q.held_sample_count() > 0) {
      t.AddRow({"already held", Count(q.held_sample_count())});
      t.AddRow({"additional examples needed", Count(r.additional_sample_count())});
    }
  } else {
    t.AddRow({"target reachable", "no"});
  }
  t.AddRow({"size if no error at all occurs",
            d.zero_failure_sample_count() > 0 ? Count(d.zero_failure_sample_count())
                                              : "beyond 2^53"});
  out << t.Render() << "\n";
  if (!r.reachable()) out << "Target unreachable: " << r.reason() << "\n";
  PrintNotesAndCautions(r, out);
}

void PrintTraining(const v1::TrainingPlanRequest& q, const v1::PlanSamplesResponse& r,
                   std::ostream& out) {
  const v1::TrainingPlanDetail& d = r.training();
  out << absl::StrFormat(
      "Training-sample plan: %s bound <= %s at delta = %s, expected training error rate %s\n\n",
      d.family_name(), FormatInput(q.target_risk()), FormatInput(q.failure_probability()),
      FormatInput(q.expected_empirical_risk()));
  Table t({"figure", "value"});
  if (r.reachable()) {
    t.AddRow({"training examples needed", Count(r.sample_count())});
    if (q.held_sample_count() > 0) {
      t.AddRow({"already held", Count(q.held_sample_count())});
      t.AddRow({"additional examples needed", Count(r.additional_sample_count())});
    }
  } else {
    t.AddRow({"target reachable", "no"});
  }
  out << t.Render() << "\n";
  if (!r.reachable()) out << "Target unreachable: " << r.reason() << "\n";
  const v1::ComparisonSampleSizes& c = d.comparison_only();
  if (c.has_realizable_sample_count() || c.has_agnostic_sample_count()) {
    out << "For comparison only (classical sample complexities; different guarantees, not plans "
           "for this bound):\n";
    Table comparison({"reference", "examples"});
    comparison.AddRow({"realizable: consistent learner reaches error <= target",
                       c.has_realizable_sample_count() ? Count(c.realizable_sample_count())
                                                       : "beyond 2^53"});
    comparison.AddRow({"agnostic: ERM within target of the best in class",
                       c.has_agnostic_sample_count() ? Count(c.agnostic_sample_count())
                                                     : "beyond 2^53"});
    out << comparison.Render() << "\n";
  }
  PrintNotesAndCautions(r, out);
}

}  // namespace

int RunPlan(const std::vector<std::string>& args, std::ostream& out, std::ostream& err) {
  if (args.empty()) return Usage(err, "", "say what to plan: holdout or training");
  const std::string sub = args[0];
  if (sub == "--version") {
    out << "riskbound " << EngineVersion() << "\n";
    return kExitOk;
  }
  if (sub == "--help" || sub == "-h" || sub == "help") {
    out << "usage: " << kPlanUsage << "\n\n"
        << "Sample-size planning: how many hold-out examples (plan holdout) or training examples\n"
           "(plan training) make a bound reach a target risk. `riskbound plan holdout --help` and\n"
           "`riskbound plan training --help` describe each.\n\n"
        << kExitText << "\n";
    return kExitOk;
  }
  if (sub != "holdout" && sub != "training") {
    return Usage(err, "", absl::StrCat("unknown plan '", sub, "': use holdout or training"));
  }
  const bool holdout = sub == "holdout";
  const std::vector<OptionSpec> specs = holdout ? HoldoutSpecs() : TrainingSpecs();
  CommandStart start;
  if (auto code = StartCommand(
          absl::StrCat("plan ", sub), holdout ? kHoldoutUsage : kTrainingUsage,
          absl::StrCat(holdout ? kHoldoutSummary : kTrainingSummary, "\n\n", kExitText), specs,
          std::vector<std::string>(args.begin() + 1, args.end()), out, err, &start,
          holdout ? kHoldoutTerms : kTrainingTerms)) {
    return *code;
  }

  v1::PlanSamplesRequest request;
  const std::optional<std::string> problem =
      holdout ? HoldoutFromFlags(start.args, request.mutable_holdout())
              : TrainingFromFlags(start.args, request.mutable_training());
  if (problem) return Usage(err, sub, *problem);

  RiskBoundClient client(start.client);
  v1::PlanSamplesResponse response;
  auto ctx = client.NewContext();
  const grpc::Status status = client.stub()->PlanSamples(ctx.get(), request, &response);
  if (!status.ok()) return ReportRpcError(status, client.options(), err);
  if (start.json) {
    out << ToJson(response);
  } else if (holdout) {
    PrintHoldout(request.holdout(), response, out);
  } else {
    PrintTraining(request.training(), response, out);
  }
  if (!response.reachable()) {
    err << "riskbound plan " << sub << ": target unreachable: " << response.reason() << "\n";
    return kExitTargetUnreachable;
  }
  return kExitOk;
}

}  // namespace riskbound::cli
