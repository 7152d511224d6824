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
#include "client_cli/json_io.h"
#include "client_cli/table.h"
#include "google/protobuf/descriptor.h"
#include "google/protobuf/struct.pb.h"
#include "google/protobuf/util/json_util.h"
#include "riskbound/v1/gate.pb.h"
#include "service/core/families.h"

namespace riskbound::cli {
namespace {

using google::protobuf::Descriptor;
using google::protobuf::FieldDescriptor;

constexpr char kUsage[] =
    "riskbound gate --policy policy.json --candidate model.json [--champion champion.json]\n"
    "                      [--output table|json] [options]";
constexpr char kSummary[] =
    "Asks the server whether a candidate model may be promoted. The three files are, in the\n"
    "protobuf JSON mapping (snake_case or lowerCamelCase names; - reads one of them from stdin):\n"
    "  --policy     riskbound.v1.GatePolicy: max_risk (epsilon, in (0,1)), failure_probability\n"
    "               (delta, in (0,1)), allowed_families, min_holdout_sample_count,\n"
    "               max_regression (tolerated candidate-minus-champion error, in [-1,1]),\n"
    "               plan_pass_probability (default 0.8)\n"
    "  --candidate  riskbound.v1.GateCandidate: id and evidence (as for certify)\n"
    "  --champion   riskbound.v1.ChampionComparison: champion_id and either paired counts on\n"
    "               the candidate's hold-out set (both_wrong_count, only_champion_wrong_count,\n"
    "               only_challenger_wrong_count, sample_count) or champion_holdout\n"
    "Verdicts: PROMOTE when the upper bound on the true error is <= max_risk (and the candidate\n"
    "is at most max_regression worse than the champion, with confidence); REJECT when the lower\n"
    "bound is > max_risk or the candidate is worse than the champion beyond max_regression with\n"
    "confidence; HOLD otherwise or below min_holdout_sample_count, with the number of extra\n"
    "labelled hold-out samples expected to settle it. All bounds hold together with\n"
    "probability >= 1 - failure_probability (the split is printed). Every answer carries an\n"
    "audit record: SHA-256 of the canonical request, families and delta spent, time, cautions.\n"
    "\n"
    "exit codes: 0 PROMOTE, 10 HOLD, 11 REJECT; 3 invalid input (an unknown or bad field is\n"
    "named by its path, e.g. policy.max_risk), 2 usage, 4 server unreachable, 1 other failure.";

std::vector<OptionSpec> Specs() {
  std::vector<OptionSpec> specs = {
      {"policy", "FILE", "the gate policy (riskbound.v1.GatePolicy JSON)"},
      {"candidate", "FILE", "the candidate model (riskbound.v1.GateCandidate JSON)"},
      {"champion", "FILE", "optional: the model in service (riskbound.v1.ChampionComparison JSON)"},
      {"output", "table|json", "output format (default table)"},
  };
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

const char* VerdictWord(v1::Verdict v) {
  switch (v) {
    case v1::VERDICT_PROMOTE:
      return "PROMOTE";
    case v1::VERDICT_HOLD:
      return "HOLD";
    case v1::VERDICT_REJECT:
      return "REJECT";
    default:
      return "UNSPECIFIED";
  }
}

std::string FamilyName(int family) {
  const core::FamilySpec* spec = core::FindFamily(static_cast<core::Family>(family));
  return spec != nullptr ? std::string(spec->slug) : absl::StrCat("family ", family);
}

std::string Signed(double v) { return absl::StrFormat("%+.6f", v); }

// The table's lines, each indented by two spaces.
std::string Indented(const Table& table) {
  std::string out;
  for (absl::string_view line : absl::StrSplit(table.Render(), '\n', absl::SkipEmpty())) {
    absl::StrAppend(&out, "  ", line, "\n");
  }
  return out;
}

void PrintTable(const v1::GateRequest& req, const v1::GateResponse& r, std::ostream& out) {
  const v1::GatePolicy& policy = req.policy();
  const double epsilon = policy.max_risk();
  out << VerdictWord(r.verdict()) << "\n";
  out << absl::StrFormat("candidate '%s', max_risk %g at confidence %g%%", req.candidate().id(),
                         epsilon, 100.0 * (1.0 - policy.failure_probability()));
  if (req.has_champion()) {
    out << absl::StrFormat(", against champion '%s' (%s)", req.champion().champion_id(),
                           req.champion().has_paired() ? "paired, same hold-out set"
                                                       : "unpaired: weaker comparison");
  }
  out << "\n\nReasons:\n";
  for (const std::string& reason : r.reasons()) out << "  * " << reason << "\n";

  out << "\nKey numbers:\n";
  Table numbers({"quantity", "value", "compared with", "outcome"});
  const v1::Certificate& c = r.risk_certificate();
  numbers.AddRow({absl::StrCat("true error, upper bound (", c.family_name(), ")"),
                  FormatProbability(c.risk_upper_bound()),
                  absl::StrFormat("max_risk %g", epsilon),
                  c.risk_upper_bound() <= epsilon ? "at or below: passes" : "above"});
  if (r.has_risk_lower_bound()) {
    numbers.AddRow({"true error, lower bound (Clopper-Pearson)",
                    FormatProbability(r.risk_lower_bound()),
                    absl::StrFormat("max_risk %g", epsilon),
                    r.risk_lower_bound() > epsilon ? "above: fails" : "not above"});
  }
  numbers.AddRow({"observed error rate", FormatProbability(c.empirical_risk()), "-", "-"});
  if (r.has_difference_upper_bound()) {
    const double t = policy.has_max_regression() ? policy.max_regression() : 0.0;
    const std::string tolerance = absl::StrFormat("max_regression %g", t);
    numbers.AddRow({"candidate - champion error, upper bound", Signed(r.difference_upper_bound()),
                    tolerance,
                    r.difference_upper_bound() <= t ? "within: passes" : "beyond"});
    numbers.AddRow({"candidate - champion error, lower bound", Signed(r.difference_lower_bound()),
                    tolerance, r.difference_lower_bound() > t ? "beyond: fails" : "not beyond"});
  }
  if (r.has_mcnemar_p_value()) {
    numbers.AddRow({"McNemar exact one-sided p (candidate better)",
                    absl::StrFormat("%.4g", r.mcnemar_p_value()), "-",
                    "informational, spends no delta"});
  }
  out << Indented(numbers);

  out << "\nFailure probability ledger (union bound: all bounds above hold together):\n";
  Table ledger({"test", "failure probability"});
  for (const v1::DeltaSpend& d : r.delta_ledger()) {
    ledger.AddRow({d.test(), absl::StrFormat("%.6g", d.failure_probability())});
  }
  ledger.AddRow({"total spent", absl::StrFormat("%.6g of %g", r.audit().spent_failure_probability(),
                                                policy.failure_probability())});
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
  for (int f : a.families_used()) families.push_back(FamilyName(f));
  out << "\nAudit record:\n";
  out << "  request sha256:   " << a.request_sha256() << "\n";
  out << "  engine version:   " << a.engine_version() << "\n";
  out << "  families used:    " << absl::StrJoin(families, ", ") << "\n";
  out << "  delta spent:      " << absl::StrFormat("%.6g", a.spent_failure_probability()) << "\n";
  out << "  decided at:       " << a.timestamp() << "\n";
  PrintCautions(a.cautions(), out);
}

}  // namespace

int RunGate(const std::vector<std::string>& args, std::ostream& out, std::ostream& err) {
  const std::vector<OptionSpec> specs = Specs();
  CommandStart start;
  if (auto code = StartCommand("gate", kUsage, kSummary, specs, args, out, err, &start)) {
    return *code;
  }
  if (!start.args.Has("policy")) return Usage(err, "--policy FILE is required");
  if (!start.args.Has("candidate")) return Usage(err, "--candidate FILE is required");
  int from_stdin = 0;
  for (const char* name : {"policy", "candidate", "champion"}) {
    from_stdin += start.args.Get(name).value_or("") == "-" ? 1 : 0;
  }
  if (from_stdin > 1) return Usage(err, "only one of the files can be read from stdin (-)");

  v1::GateRequest request;
  bool ok = ReadMessage(*start.args.Get("policy"), "policy", request.mutable_policy(), err);
  ok = ReadMessage(*start.args.Get("candidate"), "candidate", request.mutable_candidate(), err) && ok;
  if (auto champion = start.args.Get("champion")) {
    ok = ReadMessage(*champion, "champion", request.mutable_champion(), err) && ok;
  }
  if (!ok) return kExitInvalidInput;

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
