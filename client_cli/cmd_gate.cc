// riskbound gate: PROMOTE, HOLD or REJECT a candidate model under a policy,
// with an exit code a pipeline can branch on.
#include <algorithm>
#include <optional>
#include <string>
#include <vector>

#include "absl/strings/str_cat.h"
#include "absl/strings/str_format.h"
#include "absl/strings/str_join.h"
#include "absl/strings/str_split.h"
#include "absl/strings/string_view.h"
#include "client_cli/args.h"
#include "client_cli/client.h"
#include "client_cli/command_start.h"
#include "client_cli/commands.h"
#include "client_cli/exit_codes.h"
#include "client_cli/shared_flags.h"
#include "client_cli/json_io.h"
#include "client_cli/names.h"
#include "client_cli/slices_file.h"
#include "client_cli/format.h"
#include "client_cli/table.h"
#include "google/protobuf/descriptor.h"
#include "google/protobuf/struct.pb.h"
#include "google/protobuf/util/json_util.h"
#include "riskbound/v1/gate.pb.h"

namespace riskbound::cli {

std::optional<std::string> ApplyPolicyFlags(const ParsedArgs& args, v1::GatePolicy* policy) {
  for (const char* name : {"max-risk", "failure-probability", "max-regression",
                           "plan-pass-probability"}) {
    auto v = args.GetDouble(name);
    if (!v.ok()) return std::string(v.status().message());
    if (!v->has_value()) continue;
    const std::string n = name;
    if (n == "max-risk") policy->set_max_risk(**v);
    if (n == "failure-probability") policy->set_failure_probability(**v);
    if (n == "max-regression") policy->set_max_regression(**v);
    if (n == "plan-pass-probability") policy->set_plan_pass_probability(**v);
  }
  auto min_count = args.GetUint64("min-holdout-sample-count");
  if (!min_count.ok()) return std::string(min_count.status().message());
  if (min_count->has_value()) policy->set_min_holdout_sample_count(**min_count);
  if (args.Has("sequential")) policy->set_sequential(true);
  if (args.Has("allowed-families")) {
    policy->clear_allowed_families();
    for (const std::string& name : args.GetList("allowed-families")) {
      const std::optional<v1::BoundFamily> family = FamilyFromName(name);
      if (!family.has_value()) {
        return absl::StrCat("--allowed-families: ", UnknownFamilyMessage(name));
      }
      policy->add_allowed_families(*family);
    }
  }
  return std::nullopt;
}

std::vector<OptionSpec> PolicyFlagSpecs() {
  return {
      {"max-risk", "E", "highest tolerated true error, in (0,1) (policy.max_risk)"},
      {"failure-probability",
       "D",
       "delta of the whole verdict, in (0,1) "
       "(policy.failure_probability)",
       false,
       {"delta"}},
      {"max-regression", "T",
       "tolerated candidate-minus-champion error, in [-1,1], default 0 "
       "(policy.max_regression)"},
      {"min-holdout-sample-count", "N",
       "fewer hold-out samples: HOLD (policy."
       "min_holdout_sample_count)"},
      {"plan-pass-probability", "Q",
       "for a HOLD, the probability the extra samples settle it, "
       "default 0.8 (policy.plan_pass_probability)"},
      {"sequential", "",
       "anytime-valid bounds, for a gate re-run as the hold-out set grows "
       "(policy.sequential)"},
      {"allowed-families", "NAME[,NAME]",
       "families the risk bound may use, CLI words or enum "
       "names (policy.allowed_families)",
       true},
  };
}

namespace {

using google::protobuf::Descriptor;
using google::protobuf::FieldDescriptor;

constexpr char kUsage[] =
    "riskbound gate --max-risk E --failure-probability D --candidate-id ID\n"
    "               --holdout-error-count K --holdout-sample-count N [policy and champion flags]\n"
    "       riskbound gate --policy policy.json --candidate model.json [--champion champion.json]\n"
    "               [the same flags, each overriding its field of the files] [--output table|json]\n"
    "       riskbound gate ... --slices slices.csv [--max-slice-risk X]\n"
    "               [--slice-sharing bonferroni|sidak]";
constexpr char kSummary[] =
    "Asks the server whether a candidate model may be promoted. A CI step gives everything as\n"
    "flags; files give the same fields, and a flag overrides the same field of a file. Each flag\n"
    "is named after its field of riskbound.v1.GateRequest (policy.max_risk -> --max-risk,\n"
    "candidate.evidence.holdout.error_count -> --holdout-error-count, as in certify); the older\n"
    "or shorter spellings (listed as \"also\") work too.\n"
    "The files are in the protobuf JSON mapping (snake_case or lowerCamelCase names; - reads one\n"
    "of them from stdin):\n"
    "  --policy     riskbound.v1.GatePolicy: max_risk (epsilon, in (0,1)), failure_probability\n"
    "               (delta, in (0,1)), allowed_families, min_holdout_sample_count,\n"
    "               max_regression (tolerated candidate-minus-champion error, in [-1,1]),\n"
    "               plan_pass_probability (default 0.8), sequential (true: anytime-valid\n"
    "               bounds for a gate re-run as the hold-out set grows)\n"
    "  --candidate  riskbound.v1.GateCandidate: id and evidence (as for certify)\n"
    "  --champion   riskbound.v1.ChampionComparison: champion_id and either paired counts on\n"
    "               the candidate's hold-out set (both_wrong_count, only_champion_wrong_count,\n"
    "               only_challenger_wrong_count, sample_count) or champion_holdout\n"
    "With the paired-count flags, paired.sample_count is the candidate's hold-out sample count.\n"
    "Verdicts: PROMOTE when the upper bound on the true error is <= max_risk (and the candidate\n"
    "is at most max_regression worse than the champion, with confidence); REJECT when the lower\n"
    "bound is > max_risk or the candidate is worse than the champion beyond max_regression with\n"
    "confidence; HOLD otherwise or below min_holdout_sample_count, with the number of extra\n"
    "labelled hold-out samples expected to settle it. All bounds hold together with\n"
    "probability >= 1 - failure_probability (the split is printed). With slices (--slices\n"
    "FILE or candidate.evidence.slices: per-slice hold-out counts, docs/slices.md) and a slice\n"
    "limit (--max-slice-risk X, or a max_risk column of the file: policy.slice_max_risks),\n"
    "every slice must also clear its limit: a slice whose lower bound is above it REJECTs,\n"
    "undecided slices HOLD with a per-slice plan; --slice-sharing bonferroni|sidak\n"
    "(policy.slice_sharing.rule) shares the slices' delta. Every answer carries an\n"
    "audit record: SHA-256 of the canonical request, families and delta spent, time, cautions.\n"
    "Printed bounds round outward (upper up, lower down, deltas up); the reasons are the\n"
    "server's sentences.\n"
    "\n"
    "exit codes: 0 PROMOTE, 10 HOLD, 11 REJECT; 3 invalid input (an unknown or bad field is\n"
    "named by its path, e.g. policy.max_risk), 2 usage, 4 server unreachable, 7 refused for the\n"
    "server's limits, 1 other failure.";

constexpr char kTerms[] =
    "  upper bound    the candidate's true error is at most this, with the confidence of the\n"
    "                 whole verdict; rounded up\n"
    "  lower bound    the candidate's true error is at least this (Clopper-Pearson); rounded down\n"
    "  observed error rate\n"
    "                 the candidate's empirical error rate on its hold-out set\n"
    "  candidate - champion error\n"
    "                 bounds on the difference of the two true error rates (positive: the\n"
    "                 candidate is worse); upper rounded up, lower rounded down\n"
    "  McNemar p      if the two models were equally good, the probability of a split of the\n"
    "                 disagreements at least this favourable to the candidate; small values are\n"
    "                 evidence that the candidate is better. It is not the probability that the\n"
    "                 candidate is better. Informational: it spends no delta.\n"
    "  delta, failure probability\n"
    "                 the probability that a bound is wrong; the confidence is 1 - delta\n"
    "  union bound    the bounds hold together with probability >= 1 - (sum of the deltas in the\n"
    "                 ledger), so the policy's delta is split between the tests\n"
    "  delta spent    the sum of the ledger (rounded up); never more than the policy's\n";

std::vector<OptionSpec> Specs() {
  std::vector<OptionSpec> specs = {
      {"policy", "FILE", "the gate policy (riskbound.v1.GatePolicy JSON)"},
      {"candidate", "FILE", "the candidate model (riskbound.v1.GateCandidate JSON)"},
      {"champion", "FILE", "optional: the model in service (riskbound.v1.ChampionComparison JSON)"},
  };
  for (OptionSpec& s : PolicyFlagSpecs()) specs.push_back(s);
  std::vector<OptionSpec> rest = {
      {"candidate-id", "ID", "the candidate's name (candidate.id)"},
      {"holdout-error-count", "K", "the candidate's hold-out errors "
                                   "(candidate.evidence.holdout.error_count)", false,
       {"error-count", "errors"}},
      {"holdout-sample-count", "N", "the candidate's hold-out examples "
                                    "(candidate.evidence.holdout.sample_count)", false,
       {"sample-count", "samples"}},
      {"max-slice-risk", "X", "highest tolerated true error of every slice, in (0,1) "
                              "(policy.max_slice_risk); a max_risk column of --slices sets "
                              "per-slice limits (policy.slice_max_risks)"},
      {"champion-id", "ID", "the model in service (champion.champion_id)"},
      {"both-wrong-count", "K", "examples both models get wrong (champion.paired.both_wrong_count)"},
      {"only-champion-wrong-count", "K", "examples only the champion gets wrong "
                                         "(champion.paired.only_champion_wrong_count)"},
      {"only-challenger-wrong-count", "K", "examples only the candidate gets wrong "
                                           "(champion.paired.only_challenger_wrong_count)"},
      {"output", "table|json", "output format (default table)"},
  };
  for (OptionSpec& s : rest) specs.push_back(s);
  for (OptionSpec& s : SliceFlagSpecs()) specs.push_back(s);
  for (OptionSpec& s : ConnectionOptions()) specs.push_back(s);
  return specs;
}

int Usage(std::ostream& err, const std::string& message) {
  return UsageError(err, "gate", message);
}

// The field of `d` a JSON key names: its proto name or its lowerCamelCase
// JSON name (the two spellings the protobuf JSON parser accepts).
const FieldDescriptor* FieldForKey(const Descriptor* d, const std::string& key) {
  for (int i = 0; i < d->field_count(); ++i) {
    const FieldDescriptor* f = d->field(i);
    if (f->name() == key || f->json_name() == key) return f;
  }
  return nullptr;
}

void CheckObject(const google::protobuf::Struct& object, const Descriptor* d,
                 const std::string& path, std::vector<std::string>* problems);

// Checks one JSON value for field `f` at `path`: recurses into our own
// messages, and checks enum names.
void CheckValue(const google::protobuf::Value& v, const FieldDescriptor* f,
                const std::string& path, std::vector<std::string>* problems) {
  if (f->type() == FieldDescriptor::TYPE_MESSAGE && v.has_struct_value() &&
      f->message_type()->file()->package() == "riskbound.v1") {
    CheckObject(v.struct_value(), f->message_type(), path, problems);
  } else if (f->type() == FieldDescriptor::TYPE_ENUM &&
             v.kind_case() == google::protobuf::Value::kStringValue &&
             f->enum_type()->FindValueByName(v.string_value()) == nullptr) {
    std::vector<std::string> known;
    for (int i = 0; i < f->enum_type()->value_count(); ++i) {
      known.push_back(f->enum_type()->value(i)->name());
    }
    problems->push_back(absl::StrCat(path, ": unknown value '", v.string_value(), "' (known: ",
                                     absl::StrJoin(known, ", "), ")"));
  }
}

// Appends "path.key: unknown field ..." for every key of `object` that is no
// field of `d`, recursively, with the field path the server would use.
void CheckObject(const google::protobuf::Struct& object, const Descriptor* d,
                 const std::string& path, std::vector<std::string>* problems) {
  std::vector<std::string> keys;
  for (const auto& entry : object.fields()) keys.push_back(entry.first);
  std::sort(keys.begin(), keys.end());
  for (const std::string& key : keys) {
    const google::protobuf::Value& value = object.fields().at(key);
    const FieldDescriptor* f = FieldForKey(d, key);
    if (f == nullptr) {
      std::vector<std::string> known;
      for (int i = 0; i < d->field_count(); ++i) known.push_back(d->field(i)->name());
      problems->push_back(absl::StrCat(path, ".", key, ": unknown field of ", d->full_name(),
                                       " (known: ", absl::StrJoin(known, ", "), ")"));
      continue;
    }
    const std::string field_path = absl::StrCat(path, ".", f->name());
    if (f->is_repeated() && value.has_list_value()) {
      for (int i = 0; i < value.list_value().values_size(); ++i) {
        CheckValue(value.list_value().values(i), f, absl::StrCat(field_path, "[", i, "]"),
                   problems);
      }
    } else {
      CheckValue(value, f, field_path, problems);
    }
  }
}

// Reads `file` into `message`, whose fields are named "<root>.<field>" in
// errors. Returns false after printing every problem to `err`.
bool ReadMessage(const std::string& file, const std::string& root,
                 google::protobuf::Message* message, std::ostream& err) {
  auto text = ReadInput(file);
  if (!text.ok()) {
    err << "riskbound gate: --" << root << ": " << text.status().message() << "\n";
    return false;
  }
  *text = NormalizeEnumWords(*text, message->GetDescriptor());
  google::protobuf::Struct object;
  if (!google::protobuf::util::JsonStringToMessage(*text, &object).ok()) {
    err << "riskbound gate: " << file << " (--" << root
        << "): not a JSON object (check brackets, quotes and commas)\n";
    return false;
  }
  std::vector<std::string> problems;
  CheckObject(object, message->GetDescriptor(), root, &problems);
  if (!problems.empty()) {
    err << "riskbound gate: " << file << " (--" << root << ") has fields that are wrong:\n";
    for (const std::string& p : problems) err << "  " << p << "\n";
    return false;
  }
  if (auto status = ParseJson(*text, file, message); !status.ok()) {
    // The protobuf parser names the field as "(a.b): what"; give the full path.
    const std::string text_of_error(status.message());
    const std::string marker = "mapping: (";
    const std::size_t open = text_of_error.find(marker);
    const std::size_t close = open == std::string::npos
                                  ? std::string::npos
                                  : text_of_error.find("): ", open + marker.size());
    if (close != std::string::npos && close > open + marker.size()) {
      err << "riskbound gate: " << file << " (--" << root << ") has a field that is wrong:\n  "
          << root << "." << text_of_error.substr(open + marker.size(), close - open - marker.size())
          << ": " << text_of_error.substr(close + 3) << "\n";
    } else {
      err << "riskbound gate: --" << root << ": " << text_of_error << "\n";
    }
    return false;
  }
  return true;
}

// Applies the inline flags to `req`, each overriding its field (files were
// read first). Returns a usage message on error.
std::optional<std::string> ApplyFlags(const ParsedArgs& args, const SliceFlags& slices,
                                      v1::GateRequest* req) {
  if (auto problem = ApplyPolicyFlags(args, req->mutable_policy())) return problem;
  auto max_slice_risk = args.GetDouble("max-slice-risk");
  if (!max_slice_risk.ok()) return std::string(max_slice_risk.status().message());
  if (max_slice_risk->has_value()) req->mutable_policy()->set_max_slice_risk(**max_slice_risk);
  if (slices.rule.has_value()) {
    req->mutable_policy()->mutable_slice_sharing()->set_rule(*slices.rule);
  }
  if (slices.file.has_value()) {
    // Like every flag, --slices overrides its fields of the files: the
    // candidate's slices, and (with a max_risk column) the per-slice limits.
    auto* list = req->mutable_candidate()->mutable_evidence()->mutable_slices();
    list->Clear();
    for (const v1::SliceEvidence& s : slices.file->slices) *list->Add() = s;
    if (slices.file->has_max_risk) {
      auto* limits = req->mutable_policy()->mutable_slice_max_risks();
      limits->Clear();
      for (const v1::SliceMaxRisk& m : slices.file->max_risks) *limits->Add() = m;
    }
  }

  v1::GateCandidate* candidate = req->mutable_candidate();
  if (auto id = args.Get("candidate-id")) candidate->set_id(*id);
  auto errors = args.GetUint64("holdout-error-count");
  if (!errors.ok()) return std::string(errors.status().message());
  auto samples = args.GetUint64("holdout-sample-count");
  if (!samples.ok()) return std::string(samples.status().message());
  if (errors->has_value()) {
    candidate->mutable_evidence()->mutable_holdout()->set_error_count(**errors);
  }
  if (samples->has_value()) {
    candidate->mutable_evidence()->mutable_holdout()->set_sample_count(**samples);
  }

  const char* paired_flags[] = {"both-wrong-count", "only-champion-wrong-count",
                                "only-challenger-wrong-count"};
  int paired_given = 0;
  for (const char* name : paired_flags) paired_given += args.Has(name) ? 1 : 0;
  if (args.Has("champion-id")) req->mutable_champion()->set_champion_id(*args.Get("champion-id"));
  if (paired_given > 0) {
    v1::ChampionComparison* champion = req->mutable_champion();
    if (paired_given < 3 && !champion->has_paired()) {
      return std::string("--both-wrong-count, --only-champion-wrong-count and "
                         "--only-challenger-wrong-count go together (paired counts)");
    }
    v1::PairedCounts* paired = champion->mutable_paired();  // replaces champion_holdout
    for (const char* name : paired_flags) {
      auto v = args.GetUint64(name);
      if (!v.ok()) return std::string(v.status().message());
      if (!v->has_value()) continue;
      const std::string n = name;
      if (n == "both-wrong-count") paired->set_both_wrong_count(**v);
      if (n == "only-champion-wrong-count") paired->set_only_champion_wrong_count(**v);
      if (n == "only-challenger-wrong-count") paired->set_only_challenger_wrong_count(**v);
    }
    // The pairs are counted on the candidate's hold-out set.
    if (paired->sample_count() == 0 || samples->has_value()) {
      paired->set_sample_count(candidate->evidence().holdout().sample_count());
    }
  }
  if (req->has_champion() && req->champion().champion_id().empty() && args.Has("champion-id")) {
    return std::string("--champion-id: must not be empty");
  }
  if (req->has_champion() && req->champion().champion_id().empty()) {
    return std::string("the champion needs --champion-id ID (or champion_id in --champion FILE)");
  }
  if (req->has_champion() && req->champion().comparison_case() ==
                                 v1::ChampionComparison::COMPARISON_NOT_SET) {
    return std::string("--champion-id needs the paired counts (--both-wrong-count, "
                       "--only-champion-wrong-count, --only-challenger-wrong-count) or "
                       "--champion FILE");
  }
  return std::nullopt;
}

// The table's lines, each indented by two spaces.
std::string Indented(const Table& table) {
  std::string out;
  for (absl::string_view line : absl::StrSplit(table.Render(), '\n', absl::SkipEmpty())) {
    absl::StrAppend(&out, "  ", line, "\n");
  }
  return out;
}

const char* SliceOutcomeWord(v1::SliceOutcome outcome) {
  switch (outcome) {
    case v1::SLICE_OUTCOME_CLEARS:
      return "CLEARS";
    case v1::SLICE_OUTCOME_EXCEEDS:
      return "EXCEEDS";
    case v1::SLICE_OUTCOME_UNDECIDED:
      return "UNDECIDED";
    default:
      return "UNSPECIFIED";
  }
}

// The slices against their limits, worst first, and each slice's reason.
void PrintSlices(const v1::GatePolicy& policy, const v1::GateResponse& r, std::ostream& out) {
  std::vector<const v1::SliceCheck*> rows;
  for (const v1::SliceCheck& c : r.slices()) rows.push_back(&c);
  // Worst first: largest risk_upper_bound - max_risk, ties by name (the
  // server's order; kept here whatever the server sends).
  std::stable_sort(rows.begin(), rows.end(), [](const auto* a, const auto* b) {
    const double da = a->risk_upper_bound() - a->max_risk();
    const double db = b->risk_upper_bound() - b->max_risk();
    if (da != db) return da > db;
    return a->slice_name() < b->slice_name();
  });
  out << absl::StrFormat("\nSlices, worst first (%s sharing of the slices' delta):\n",
                         SliceShareRuleWord(policy.slice_sharing().rule()));
  Table table({"slice_name", "outcome", "max_risk", "errors/samples", "lower", "upper",
               "additional_sample_count"});
  for (const v1::SliceCheck* c : rows) {
    table.AddRow({c->slice_name(), SliceOutcomeWord(c->outcome()), FormatInput(c->max_risk()),
                  absl::StrCat(c->error_count(), "/", c->sample_count()),
                  FormatLower(c->risk_lower_bound()), FormatUpper(c->risk_upper_bound()),
                  c->has_additional_sample_count() ? absl::StrCat(c->additional_sample_count())
                                                   : "-"});
  }
  out << Indented(table);
  out << "\nSlice reasons:\n";
  for (const v1::SliceCheck* c : rows) {
    out << "  * " << c->slice_name() << ": " << c->reason() << "\n";
  }
}

void PrintTable(const v1::GateRequest& req, const v1::GateResponse& r, std::ostream& out) {
  const v1::GatePolicy& policy = req.policy();
  const double epsilon = policy.max_risk();
  out << VerdictWord(r.verdict()) << "\n";
  out << absl::StrFormat("candidate '%s', max_risk %s at confidence >= %s (delta = %s)",
                         req.candidate().id(), FormatInput(epsilon),
                         FormatConfidence(policy.failure_probability()),
                         FormatInput(policy.failure_probability()));
  if (req.has_champion()) {
    out << absl::StrFormat(", against champion '%s' (%s)", req.champion().champion_id(),
                           req.champion().has_paired() ? "paired, same hold-out set"
                                                       : "unpaired: weaker comparison");
  }
  if (policy.sequential())
    out << "\nsequential mode: anytime-valid bounds, valid over re-runs on a growing hold-out set";
  out << "\n\nReasons:\n";
  for (const std::string& reason : r.reasons()) out << "  * " << reason << "\n";

  out << "\nKey numbers:\n";
  Table numbers({"quantity", "value", "compared with", "outcome"});
  const v1::Certificate& c = r.risk_certificate();
  numbers.AddRow({absl::StrCat("true error, upper bound (", c.family_name(), ")"),
                  FormatUpper(c.risk_upper_bound()),
                  absl::StrCat("max_risk ", FormatInput(epsilon)),
                  c.risk_upper_bound() <= epsilon ? "at or below: passes" : "above"});
  if (r.has_risk_lower_bound()) {
    numbers.AddRow({policy.sequential() ? "true error, lower bound (holdout-anytime)"
                                        : "true error, lower bound (Clopper-Pearson)",
                    FormatLower(r.risk_lower_bound()),
                    absl::StrCat("max_risk ", FormatInput(epsilon)),
                    r.risk_lower_bound() > epsilon ? "above: fails" : "not above"});
  }
  numbers.AddRow({"observed error rate", FormatObserved(c.empirical_risk()), "-", "-"});
  if (r.has_difference_upper_bound()) {
    const double t = policy.has_max_regression() ? policy.max_regression() : 0.0;
    const std::string tolerance = absl::StrCat("max_regression ", FormatInput(t));
    numbers.AddRow({"candidate - champion error, upper bound", FormatSignedUpper(r.difference_upper_bound()),
                    tolerance,
                    r.difference_upper_bound() <= t ? "within: passes" : "beyond"});
    numbers.AddRow({"candidate - champion error, lower bound", FormatSignedLower(r.difference_lower_bound()),
                    tolerance, r.difference_lower_bound() > t ? "beyond: fails" : "not beyond"});
  }
  if (r.has_mcnemar_p_value()) {
    numbers.AddRow({"McNemar exact one-sided p-value (see below)",
                    FormatSignificant(r.mcnemar_p_value(), 4, Rounding::kUp), "-",
                    "informational, spends no delta"});
  }
  out << Indented(numbers);
  if (r.has_mcnemar_p_value()) {
    out << "  McNemar p-value: if the two models were equally good, the probability of a split of\n"
           "  their disagreements at least this favourable to the candidate. Small values are\n"
           "  evidence that the candidate is better; it is not the probability that it is better.\n";
  }

  if (r.slices_size() > 0) PrintSlices(policy, r, out);

  out << (policy.slice_sharing().rule() == v1::SLICE_SHARE_RULE_SIDAK && r.slices_size() > 0
              ? "\nFailure probability ledger (union bound, the slice entries combined by "
                "Sidak: all bounds above hold together):\n"
              : "\nFailure probability ledger (union bound: all bounds above hold together):\n");
  Table ledger({"test", "failure probability"});
  for (const v1::DeltaSpend& d : r.delta_ledger()) {
    ledger.AddRow({d.test(), FormatFailureProbability(d.failure_probability())});
  }
  ledger.AddRow({"total spent",
                 absl::StrCat(FormatFailureProbability(r.audit().spent_failure_probability()),
                              " of ", FormatInput(policy.failure_probability()))});
  out << Indented(ledger);

  if (r.verdict() == v1::VERDICT_HOLD) {
    if (r.has_additional_sample_count()) {
      out << "\nMore labelled hold-out samples expected to settle the verdict: "
          << r.additional_sample_count() << "\n";
    } else {
      out << "\nNo hold-out plan settles the verdict (see the reasons).\n";
    }
  }

  const v1::AuditRecord& a = r.audit();
  std::vector<std::string> families;
  for (int f : a.families_used()) families.push_back(FamilyWord(f));
  out << "\nAudit record:\n";
  out << "  request sha256:   " << a.request_sha256() << "\n";
  out << "  engine version:   " << a.engine_version() << "\n";
  out << "  families used:    " << absl::StrJoin(families, ", ") << "\n";
  out << "  delta spent:      " << FormatFailureProbability(a.spent_failure_probability())
      << "\n";
  out << "  decided at:       " << a.timestamp() << "\n";
  PrintCautions(a.cautions(), out);
}

}  // namespace

int RunGate(const std::vector<std::string>& args, std::ostream& out, std::ostream& err) {
  const std::vector<OptionSpec> specs = Specs();
  CommandStart start;
  if (auto code = StartCommand("gate", kUsage, kSummary, specs, args, out, err, &start, kTerms)) {
    return *code;
  }
  if (!start.args.Has("policy") &&
      (!start.args.Has("max-risk") || !start.args.Has("failure-probability"))) {
    return Usage(err, "give the policy: --max-risk E and --failure-probability D (or --policy "
                      "FILE)");
  }
  if (!start.args.Has("candidate") && !start.args.Has("candidate-id")) {
    return Usage(err, "give the candidate: --candidate-id ID with --holdout-error-count K and "
                      "--holdout-sample-count N (or --candidate FILE)");
  }
  if (!start.args.Has("candidate") &&
      start.args.Has("holdout-error-count") != start.args.Has("holdout-sample-count")) {
    return Usage(err, "--holdout-error-count and --holdout-sample-count go together (hold-out "
                      "evidence)");
  }
  int from_stdin = 0;
  for (const char* name : {"policy", "candidate", "champion"}) {
    from_stdin += start.args.Get(name).value_or("") == "-" ? 1 : 0;
  }
  if (from_stdin > 1) return Usage(err, "only one of the files can be read from stdin (-)");

  v1::GateRequest request;
  bool ok = true;
  if (auto policy = start.args.Get("policy")) {
    ok = ReadMessage(*policy, "policy", request.mutable_policy(), err) && ok;
  }
  if (auto candidate = start.args.Get("candidate")) {
    ok = ReadMessage(*candidate, "candidate", request.mutable_candidate(), err) && ok;
  }
  if (auto champion = start.args.Get("champion")) {
    ok = ReadMessage(*champion, "champion", request.mutable_champion(), err) && ok;
  }
  if (!ok) return kExitInvalidInput;
  SliceFlags slices;
  if (auto code = ReadSliceFlags("gate", start.args, &slices, err)) return *code;
  if (auto problem = ApplyFlags(start.args, slices, &request)) return Usage(err, *problem);

  RiskBoundClient client(start.client);
  v1::GateResponse response;
  auto context = client.NewContext();
  const grpc::Status status = client.stub()->Gate(context.get(), request, &response);
  if (!status.ok()) return ReportRpcError(status, client.options(), err);
  if (start.json) {
    out << ToJson(response);
  } else {
    PrintTable(request, response, out);
  }
  switch (response.verdict()) {
    case v1::VERDICT_PROMOTE:
      return kExitOk;
    case v1::VERDICT_HOLD:
      return kExitGateHold;
    case v1::VERDICT_REJECT:
      return kExitGateReject;
    default:
      err << "riskbound gate: the server answered without a verdict\n";
      return kExitInternal;
  }
}

}  // namespace riskbound::cli
