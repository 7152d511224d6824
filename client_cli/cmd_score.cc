// riskbound score: a whole model registry over one ScoreRegistry stream,
// one output row for every input row, in input order.
#include <unistd.h>

#include <atomic>
#include <chrono>
#include <cstdio>
#include <deque>
#include <fstream>
#include <iostream>
#include <memory>
#include <optional>
#include <string>
#include <thread>
#include <vector>

#include "absl/strings/match.h"
#include "absl/strings/numbers.h"
#include "absl/strings/str_cat.h"
#include "absl/strings/str_format.h"
#include "absl/strings/str_split.h"
#include "absl/synchronization/mutex.h"
#include "absl/time/clock.h"
#include "client_cli/args.h"
#include "client_cli/client.h"
#include "client_cli/command_start.h"
#include "client_cli/commands.h"
#include "client_cli/exit_codes.h"
#include "client_cli/format.h"
#include "client_cli/json_io.h"
#include "client_cli/names.h"
#include "client_cli/registry_report.h"
#include "client_cli/registry_rows.h"
#include "client_cli/shared_flags.h"
#include "grpcpp/grpcpp.h"
#include "riskbound/v1/registry.pb.h"
#include "riskbound/v1/riskbound.grpc.pb.h"

namespace riskbound::cli {
namespace {

constexpr char kName[] = "score";

constexpr char kUsage[] =
    "riskbound score INPUT [--output table|jsonl|csv] [--output-file FILE] [--report FILE]\n"
    "                [--failure-probability D] [--families NAME[,NAME]|all]      (certify mode)\n"
    "                [--policy FILE] [--max-risk E] [policy flags]             (gate mode)\n"
    "                [--delta-sharing per-holdout-set --holdout-set ID=K ...]\n"
    "       riskbound score INPUT --resume FILE [the same flags]";
constexpr char kSummary[] =
    "Scores every model of a registry export through one stream (RiskBound.ScoreRegistry):\n"
    "certificates for each record (certify mode, the default), or a PROMOTE/HOLD/REJECT verdict\n"
    "for each under a gate policy (gate mode: --policy or --max-risk). INPUT (- for stdin) is\n"
    "JSON lines (one riskbound.v1.RegistryRecord per line, protobuf JSON mapping) or CSV (by\n"
    "the .csv extension or --input-format csv) whose header names RegistryRecord fields by\n"
    "path: record_id, model_name, model_version, holdout_set_id, delta_weight,\n"
    "evidence.holdout.error_count, evidence.holdout.sample_count,\n"
    "evidence.training.error_count, evidence.training.sample_count,\n"
    "evidence.training.capacity.vc_dimension, champion.champion_id,\n"
    "champion.paired.both_wrong_count, ... (any single-valued field; empty cells stay unset).\n"
    "Blank lines are skipped; every other line gets exactly one output row, in input order,\n"
    "keyed by its line number and record_id (line-N when the record has none). A line that\n"
    "cannot be read or scored becomes an error row with the reason and the run goes on.\n"
    "Output: a table on stdout (default), or JSON lines / CSV (--output) on stdout or in\n"
    "--output-file (JSON lines there by default). Rows carry no timestamp, so a re-run writes\n"
    "the same bytes. After an interruption, --resume FILE scores only the rows missing from\n"
    "FILE and appends them: the final file equals an uninterrupted run's.\n"
    "Failure probability: by default each record is scored at the whole delta and holds on\n"
    "its own. When several records were scored on one shared hold-out set and you will act on\n"
    "them together (pick the best), declare each set with --holdout-set ID=K (K records, fixed\n"
    "in advance) and --delta-sharing per-holdout-set: each record then gets delta/K (union\n"
    "bound) and all statements about one set hold together with probability >= 1 - delta.\n"
    "A summary (counts, what holds, cautions) goes to stderr; --report writes a self-contained\n"
    "HTML page. A progress line is shown on stderr when it is a terminal.\n"
    "\n"
    "exit codes: 0 every row scored, 12 some rows are error rows (the others are written),\n"
    "3 invalid settings or input file, 2 usage, 4 server unreachable, 7 refused for the\n"
    "server's limits, 1 other failure.";

constexpr char kTerms[] =
    "  row            one output line per non-blank input line: the record's result or error\n"
    "  delta sharing  per-record: each result holds with probability >= 1 - delta on its own;\n"
    "                 per-holdout-set: the records of one declared hold-out set share delta\n"
    "                 (union bound), so they hold together\n"
    "  vacuous        the bound is 1: the evidence says nothing about the model\n"
    "  upper bound    the model's true error is at most this with probability >= 1 - its delta;\n"
    "                 rounded up in tables\n";

std::vector<OptionSpec> Specs() {
  std::vector<OptionSpec> specs = {
      {"input", "FILE", "the registry export (or give it as the first word; - for stdin)"},
      {"input-format", "jsonl|csv", "default: csv for a .csv file, else jsonl"},
      {"output", "table|jsonl|csv", "row format (default table on stdout, jsonl in a file)"},
      {"output-file", "FILE", "write the rows to FILE instead of stdout"},
      {"resume", "FILE", "continue an interrupted run whose rows are in FILE"},
      {"report", "FILE", "also write a self-contained HTML report"},
      {"settings", "FILE",
       "the run's settings as riskbound.v1.ScoreSettings JSON (flags "
       "override its fields)"},
      {"families",
       "NAME[,NAME]",
       "certify mode: bound families, or 'all' "
       "(settings.certify.listed, all_applicable)",
       true,
       {"family"}},
      {"delta-weights", "W[,W]",
       "certify mode: shares of each record's delta across the listed "
       "families"},
      {"policy", "FILE", "gate mode: the gate policy (riskbound.v1.GatePolicy JSON)"},
  };
  for (OptionSpec& s : PolicyFlagSpecs()) {
    if (s.name == "failure-probability") {
      s.help =
          "delta of the run, in (0,1), default 0.05 (settings.certify."
          "failure_probability, or the policy's)";
    }
    specs.push_back(s);
  }
  std::vector<OptionSpec> rest = {
      {"delta-sharing", "per-record|per-holdout-set",
       "how delta is shared across records "
       "(settings.delta_sharing)"},
      {"holdout-set", "ID=K",
       "a shared hold-out set and its record count, fixed in advance "
       "(settings.holdout_sets)",
       true},
      {"streams", "N",
       "score over N streams at once (1 to 64, default 1); with a --server "
       "target of several replicas each stream goes to the next replica "
       "(round robin); per-record sharing only"},
  };
  for (OptionSpec& s : rest) specs.push_back(s);
  for (OptionSpec& s : ConnectionOptions()) specs.push_back(s);
  return specs;
}

int Usage(std::ostream& err, const std::string& message) { return UsageError(err, kName, message); }

int InputError(std::ostream& err, const std::string& message) {
  err << "riskbound score: " << message << "\n";
  return kExitInvalidInput;
}

// The run's settings from --settings, the mode flags and the sharing flags.
std::optional<std::string> BuildSettings(const ParsedArgs& args, v1::ScoreSettings* settings,
                                         std::ostream& err, int* exit_code) {
  if (auto file = args.Get("settings")) {
    if (auto code = LoadJsonInput(kName, *file, settings, err)) {
      *exit_code = *code;
      return std::string();
    }
  }
  const bool gate = args.Has("policy") || args.Has("max-risk") || settings->has_gate();
  if (gate) {
    if (args.Has("families") || args.Has("delta-weights")) {
      return std::string(
          "--families and --delta-weights are certify-mode flags; in gate mode "
          "use --allowed-families");
    }
    v1::GatePolicy* policy = settings->mutable_gate();
    if (auto file = args.Get("policy")) {
      if (auto code = LoadJsonInput(kName, *file, policy, err)) {
        *exit_code = *code;
        return std::string();
      }
    }
    if (auto problem = ApplyPolicyFlags(args, policy)) return problem;
    if (policy->failure_probability() == 0) policy->set_failure_probability(0.05);
  } else {
    for (const char* flag : {"max-regression", "min-holdout-sample-count", "plan-pass-probability",
                             "allowed-families"}) {
      if (args.Has(flag)) {
        return absl::StrCat("--", flag, " is a gate-mode flag: give --policy or --max-risk");
      }
    }
    v1::CertifySettings* certify = settings->mutable_certify();
    v1::CertifyRequest families;
    if (auto problem = ApplyFamilies(args, &families)) return problem;
    if (families.has_listed()) *certify->mutable_listed() = families.listed();
    if (families.has_all_applicable()) certify->mutable_all_applicable();
    auto delta = args.GetDouble("failure-probability");
    if (!delta.ok()) return std::string(delta.status().message());
    if (delta->has_value()) certify->set_failure_probability(**delta);
    if (certify->failure_probability() == 0) certify->set_failure_probability(0.05);
  }
  if (auto sharing = args.Get("delta-sharing")) {
    if (*sharing == "per-record" || *sharing == "DELTA_SHARING_PER_RECORD") {
      settings->set_delta_sharing(v1::DELTA_SHARING_PER_RECORD);
    } else if (*sharing == "per-holdout-set" || *sharing == "DELTA_SHARING_PER_HOLDOUT_SET") {
      settings->set_delta_sharing(v1::DELTA_SHARING_PER_HOLDOUT_SET);
    } else {
      return std::string("--delta-sharing must be per-record or per-holdout-set");
    }
  }
  for (const std::string& spec : args.GetList("holdout-set")) {
    const std::size_t eq = spec.rfind('=');
    std::uint64_t k = 0;
    if (eq == std::string::npos || eq == 0 || !absl::SimpleAtoi(spec.substr(eq + 1), &k)) {
      return absl::StrCat("--holdout-set: '", spec, "' is not ID=K (K a record count)");
    }
    v1::HoldoutSetPlan* plan = settings->add_holdout_sets();
    plan->set_holdout_set_id(spec.substr(0, eq));
    plan->set_record_count(k);
  }
  if (settings->holdout_sets_size() > 0 &&
      settings->delta_sharing() == v1::DELTA_SHARING_UNSPECIFIED) {
    settings->set_delta_sharing(v1::DELTA_SHARING_PER_HOLDOUT_SET);
  }
  return std::nullopt;
}

// One input line waiting for its row.
struct Pending {
  std::uint64_t line = 0;
  std::size_t stream = 0;
  // The record could not be sent: the stream has ended, and so does the run
  // (no row is written for this line or any later one; --resume goes on).
  bool unsent = false;
  std::optional<Row> local;  // set when the line could not be sent
};

// A bounded first-in first-out queue between the sending and the receiving
// thread: the sender blocks when it is full, so memory stays flat.
class PendingQueue {
 public:
  static constexpr std::size_t kCapacity = 4096;
  void Push(Pending p) {
    absl::MutexLock lock(&mu_);
    mu_.Await(absl::Condition(
        +[](PendingQueue* q) ABSL_EXCLUSIVE_LOCKS_REQUIRED(q->mu_) {
          return q->items_.size() < kCapacity || q->abandoned_;
        },
        this));
    items_.push_back(std::move(p));
  }
  void Close() {
    absl::MutexLock lock(&mu_);
    closed_ = true;
  }
  void Abandon() {
    absl::MutexLock lock(&mu_);
    abandoned_ = true;
  }
  bool abandoned() {
    absl::MutexLock lock(&mu_);
    return abandoned_;
  }
  // The next entry, or nullopt once closed and empty.
  std::optional<Pending> Pop() {
    absl::MutexLock lock(&mu_);
    mu_.Await(absl::Condition(
        +[](PendingQueue* q)
             ABSL_EXCLUSIVE_LOCKS_REQUIRED(q->mu_) { return !q->items_.empty() || q->closed_; },
        this));
    if (items_.empty()) return std::nullopt;
    Pending p = std::move(items_.front());
    items_.pop_front();
    return p;
  }

 private:
  absl::Mutex mu_;
  std::deque<Pending> items_ ABSL_GUARDED_BY(mu_);
  bool closed_ ABSL_GUARDED_BY(mu_) = false;
  bool abandoned_ ABSL_GUARDED_BY(mu_) = false;
};

// Reads the input line by line; counts physical lines from 1.
class InputLines {
 public:
  explicit InputLines(std::istream* in) : in_(in) {}
  // The next non-blank line and its number, or false at the end.
  bool Next(std::string* text, std::uint64_t* number) {
    while (std::getline(*in_, *text)) {
      ++line_;
      bytes_ += text->size() + 1;
      if (!text->empty() && text->back() == '\r') text->pop_back();
      if (absl::StripAsciiWhitespace(*text).empty()) continue;
      *number = line_;
      return true;
    }
    return false;
  }
  std::uint64_t bytes() const { return bytes_; }

 private:
  std::istream* in_;
  std::uint64_t line_ = 0;
  std::uint64_t bytes_ = 0;
};

// The rows an interrupted run already wrote to `path`: every complete line
// (a partial last line is cut off the file). Header skipped for CSV.
absl::StatusOr<std::vector<Row>> ReadPriorRows(const std::string& path, OutputFormat format) {
  std::ifstream in(path, std::ios::binary);
  std::vector<Row> rows;
  if (!in) return rows;  // nothing written yet
  std::string all((std::istreambuf_iterator<char>(in)), std::istreambuf_iterator<char>());
  const std::size_t complete = all.rfind('\n') == std::string::npos ? 0 : all.rfind('\n') + 1;
  if (complete < all.size()) {
    if (truncate(path.c_str(), static_cast<off_t>(complete)) != 0) {
      return absl::InternalError(absl::StrCat("cannot cut the partial last row of ", path));
    }
  }
  std::size_t start = 0;
  bool first = true;
  while (start < complete) {
    const std::size_t end = all.find('\n', start);
    const std::string text = all.substr(start, end - start);
    start = end + 1;
    if (first && format == OutputFormat::kCsv) {
      first = false;
      if (text + "\n" != CsvHeader()) {
        return absl::InvalidArgumentError(
            absl::StrCat(path, " does not start with riskbound score's CSV header"));
      }
      continue;
    }
    first = false;
    std::optional<Row> row = RowFromText(text, format);
    if (!row.has_value()) {
      return absl::InvalidArgumentError(
          absl::StrCat(path, ": a line is not a row of riskbound score in this --output format: ",
                       text.substr(0, 80)));
    }
    rows.push_back(std::move(*row));
  }
  return rows;
}

// Prints the table form of a row.
// "slice a", "slices a, b, c" or "slices a, b, c and 4 more".
std::string SliceList(const std::vector<std::string>& names) {
  return absl::StrCat(names.size() == 1 ? "slice " : "slices ", FirstNames(names, 3));
}

std::string TableRow(const Row& row) {
  const v1::RecordResult& r = row.result;
  std::string result, detail;
  if (r.has_gated()) {
    result = VerdictWord(r.gated().verdict());
    detail =
        absl::StrCat("upper bound ", FormatUpper(r.gated().risk_certificate().risk_upper_bound()));
    if (r.gated().has_additional_sample_count()) {
      absl::StrAppend(&detail, "; about ", r.gated().additional_sample_count(),
                      " more labelled samples");
    }
    const SliceDigest d = DigestSlices(r);
    if (!d.exceeding.empty()) {
      absl::StrAppend(&detail, "; ", SliceList(d.exceeding), " above ",
                      d.exceeding.size() == 1 ? "its" : "their", " limit");
    }
    if (!d.undecided.empty()) {
      absl::StrAppend(&detail, "; ", SliceList(d.undecided), " undecided");
    }
  } else if (r.has_certified()) {
    const v1::Certificate& t = r.certified().tightest();
    result = t.vacuous() ? "vacuous" : "certified";
    detail = absl::StrCat("upper bound ", FormatUpper(t.risk_upper_bound()), " (", t.family_name(),
                          ", delta ", FormatFailureProbability(r.failure_probability()), ")");
    // Relabel evidence from approximate training: an estimate, not a bound.
    if (t.heuristic()) absl::StrAppend(&detail, "; HEURISTIC, not a bound");
    if (const SliceDigest d = DigestSlices(r); d.slice_count > 0) {
      absl::StrAppend(&detail, "; worst slice ", d.worst_slice_name, " ",
                      FormatUpper(d.worst_slice_upper_bound));
    }
  } else {
    result = "error";
    detail = r.error().message();
    if (r.error().field_violations_size() > 0) {
      detail = absl::StrCat(r.error().field_violations(0).field(), ": ",
                            r.error().field_violations(0).description());
      if (r.error().field_violations_size() > 1) {
        absl::StrAppend(&detail, " (and ", r.error().field_violations_size() - 1, " more)");
      }
    }
  }
  std::string model = r.model_name();
  if (!r.model_version().empty()) absl::StrAppend(&model, " ", r.model_version());
  return absl::StrFormat("%-6d  %-20s  %-24s  %-9s  %s\n", row.line, r.record_id(), model, result,
                         detail);
}

}  // namespace

int RunScore(const std::vector<std::string>& raw_args, std::ostream& out, std::ostream& err) {
  std::vector<std::string> args = raw_args;
  std::optional<std::string> positional;
  if (!args.empty() && (args[0] == "-" || !absl::StartsWith(args[0], "-"))) {
    positional = args[0];
    args.erase(args.begin());
  }
  const std::vector<OptionSpec> specs = Specs();
  auto parsed = ParseArgs(specs, args);
  if (!parsed.ok()) return Usage(err, std::string(parsed.status().message()));
  if (parsed->Has("help")) {
    out << FormatHelp(kUsage, kSummary, specs, kTerms);
    return kExitOk;
  }
  if (parsed->Has("version")) {
    out << "riskbound " << EngineVersion() << "\n";
    return kExitOk;
  }
  auto client_options = ClientOptionsFromArgs(*parsed);
  if (!client_options.ok()) return Usage(err, std::string(client_options.status().message()));

  std::string input_path;
  if (positional.has_value() && parsed->Has("input")) {
    return Usage(err, "give the input once: as the first word or with --input");
  }
  if (positional.has_value()) input_path = *positional;
  if (auto in = parsed->Get("input")) input_path = *in;
  if (input_path.empty()) return Usage(err, "give the registry export: riskbound score INPUT");

  InputFormat input_format =
      absl::EndsWith(input_path, ".csv") ? InputFormat::kCsv : InputFormat::kJsonLines;
  if (auto f = parsed->Get("input-format")) {
    if (*f == "csv")
      input_format = InputFormat::kCsv;
    else if (*f == "jsonl")
      input_format = InputFormat::kJsonLines;
    else
      return Usage(err, "--input-format must be jsonl or csv");
  }
  std::optional<std::string> output_file = parsed->Get("output-file");
  const std::optional<std::string> resume = parsed->Get("resume");
  if (resume.has_value()) {
    if (output_file.has_value() && *output_file != *resume) {
      return Usage(err, "--resume FILE continues FILE: give --output-file only if it is FILE");
    }
    output_file = resume;
  }
  OutputFormat output_format =
      output_file.has_value() ? OutputFormat::kJsonLines : OutputFormat::kTable;
  if (auto f = parsed->Get("output")) {
    if (*f == "table")
      output_format = OutputFormat::kTable;
    else if (*f == "jsonl")
      output_format = OutputFormat::kJsonLines;
    else if (*f == "csv")
      output_format = OutputFormat::kCsv;
    else
      return Usage(err, "--output must be table, jsonl or csv");
  }
  if (resume.has_value() && output_format == OutputFormat::kTable) {
    return Usage(err, "--resume needs rows a program can read back: --output jsonl or csv");
  }

  v1::ScoreSettings settings;
  int settings_exit = kExitOk;
  if (auto problem = BuildSettings(*parsed, &settings, err, &settings_exit)) {
    if (settings_exit != kExitOk) return settings_exit;
    return Usage(err, *problem);
  }
  const std::optional<double> max_risk =
      settings.has_gate() ? std::optional<double>(settings.gate().max_risk()) : std::nullopt;
  const bool shared = settings.delta_sharing() == v1::DELTA_SHARING_PER_HOLDOUT_SET;

  // The input.
  std::ifstream file_in;
  std::istream* in = &std::cin;
  std::uint64_t input_size = 0;
  if (input_path != "-") {
    file_in.open(input_path, std::ios::binary | std::ios::ate);
    if (!file_in) return InputError(err, absl::StrCat("cannot read ", input_path));
    input_size = static_cast<std::uint64_t>(file_in.tellg());
    file_in.seekg(0);
    in = &file_in;
  }
  InputLines lines(in);
  std::optional<CsvColumns> columns;
  if (input_format == InputFormat::kCsv) {
    std::string header;
    std::uint64_t number = 0;
    if (!lines.Next(&header, &number)) return InputError(err, input_path + ": no CSV header");
    auto parsed_columns = CsvColumns::FromHeader(header);
    if (!parsed_columns.ok()) {
      return InputError(err, absl::StrCat(input_path, ": ", parsed_columns.status().message()));
    }
    columns = std::move(*parsed_columns);
  }

  // An interrupted run's rows.
  std::vector<Row> prior;
  if (resume.has_value()) {
    auto rows = ReadPriorRows(*resume, output_format);
    if (!rows.ok()) return InputError(err, std::string(rows.status().message()));
    prior = std::move(*rows);
  }

  // The output.
  std::ofstream file_out;
  std::ostream* rows_out = &out;
  if (output_file.has_value()) {
    const bool append =
        resume.has_value() && (!prior.empty() || output_format != OutputFormat::kCsv);
    std::ifstream exists(*output_file);
    const bool had_content = append && exists && exists.peek() != EOF;
    file_out.open(*output_file,
                  append ? std::ios::app | std::ios::binary : std::ios::trunc | std::ios::binary);
    if (!file_out) return InputError(err, absl::StrCat("cannot write ", *output_file));
    rows_out = &file_out;
    if (output_format == OutputFormat::kCsv && !had_content) file_out << CsvHeader();
  } else if (output_format == OutputFormat::kCsv) {
    out << CsvHeader();
  } else if (output_format == OutputFormat::kTable) {
    out << absl::StrFormat("%-6s  %-20s  %-24s  %-9s  %s\n", "line", "record_id", "model", "result",
                           "detail");
  }

  std::optional<RegistryReport> report;
  if (parsed->Has("report")) report.emplace(max_risk);
  std::uint64_t error_rows = 0;
  for (const Row& row : prior) {
    if (row.result.has_error()) ++error_rows;
    if (report.has_value()) report->Add(row);
  }

  // The streams: rows go to them in turn, and their answers are read back in
  // the same turn, so the output keeps the input order.
  auto stream_count = parsed->GetUint64("streams");
  if (!stream_count.ok()) return Usage(err, std::string(stream_count.status().message()));
  const std::size_t n_streams = stream_count->value_or(1);
  if (n_streams < 1 || n_streams > 64) return Usage(err, "--streams must be 1 to 64");
  if (n_streams > 1 && shared) {
    return Usage(err,
                 "--streams above 1 needs per-record sharing: each stream keeps its own "
                 "account of a hold-out set's delta");
  }
  using Stream = grpc::ClientReaderWriter<v1::ScoreRegistryRequest, v1::ScoreRegistryResponse>;
  RiskBoundClient client(*client_options);
  if (n_streams > 1) {
    // Round robin spreads calls over the replicas that are connected when
    // each call starts: connect first, and give the other addresses of the
    // target a moment to connect too, so the streams do not all start on
    // the first replica that answered.
    // A few cheap calls drive the channel meanwhile (its subchannels report
    // READY as it works).
    client.channel()->WaitForConnected(std::chrono::system_clock::now() + std::chrono::seconds(5));
    for (int i = 0; i < 10; ++i) {
      grpc::ClientContext probe;
      AddCallCredentials(*client_options, &probe);
      probe.set_deadline(std::chrono::system_clock::now() + std::chrono::seconds(2));
      v1::ListFamiliesResponse ignored;
      (void)client.stub()->ListFamilies(&probe, v1::ListFamiliesRequest(), &ignored);
      std::this_thread::sleep_for(std::chrono::milliseconds(20));
    }
  }
  std::vector<std::unique_ptr<grpc::ClientContext>> contexts;
  std::vector<std::unique_ptr<Stream>> streams;
  for (std::size_t i = 0; i < n_streams; ++i) {
    contexts.push_back(std::make_unique<grpc::ClientContext>());
    AddCallCredentials(*client_options, contexts.back().get());
    if (parsed->Has("timeout")) {
      contexts.back()->set_deadline(std::chrono::system_clock::now() +
                                    absl::ToChronoMilliseconds(client_options->timeout));
    }
    streams.push_back(client.stub()->ScoreRegistry(contexts.back().get()));
    v1::ScoreRegistryRequest first;
    *first.mutable_settings() = settings;
    streams.back()->Write(first);
  }

  PendingQueue queue;
  std::atomic<std::uint64_t> bytes_read{0};
  std::string prior_mismatch;
  std::thread sender([&] {
    std::string text;
    std::uint64_t number = 0;
    std::size_t index = 0;
    std::size_t turn = 0;
    std::vector<bool> open(n_streams, true);
    while (!queue.abandoned() && lines.Next(&text, &number)) {
      bytes_read.store(lines.bytes(), std::memory_order_relaxed);
      v1::ScoreRegistryRequest item;
      v1::RegistryRecord* record = item.mutable_record();
      const absl::Status read = columns.has_value() ? columns->Fill(text, number, record)
                                                    : ParseJsonLine(text, number, record);
      if (record->record_id().empty()) record->set_record_id(absl::StrCat("line-", number));
      if (index < prior.size()) {
        // Already answered by the interrupted run: re-sent only to count its
        // share again (per-holdout-set sharing), never re-scored.
        if (prior[index].line != number && prior_mismatch.empty()) {
          prior_mismatch =
              absl::StrCat("row ", index + 1, " of the file answers line ", prior[index].line,
                           " but that row of the input is line ", number);
        }
        // (Per-holdout-set sharing runs one stream.)
        if (shared && read.ok() && !prior[index].result.has_error() && open[0]) {
          record->set_ledger_only(true);
          open[0] = streams[0]->Write(item);
        }
        ++index;
        continue;
      }
      ++index;
      Pending pending;
      pending.line = number;
      if (!read.ok()) {
        pending.local = LocalErrorRow(number, record->record_id(), read);
      } else {
        pending.stream = turn++ % n_streams;
        if (open[pending.stream]) open[pending.stream] = streams[pending.stream]->Write(item);
        pending.unsent = !open[pending.stream];
      }
      const bool unsent = pending.unsent;
      queue.Push(std::move(pending));
      if (unsent) break;
    }
    for (std::size_t i = 0; i < n_streams; ++i) {
      if (open[i]) streams[i]->WritesDone();
    }
    queue.Close();
  });

  const bool progress = isatty(STDERR_FILENO) && output_file.has_value();
  const absl::Time started = absl::Now();
  absl::Time last_progress = started;
  std::uint64_t written = 0;
  bool stream_alive = true;
  while (std::optional<Pending> pending = queue.Pop()) {
    Row row;
    if (pending->unsent) {
      stream_alive = false;
      queue.Abandon();
      break;
    }
    if (pending->local.has_value()) {
      row = std::move(*pending->local);
    } else {
      v1::ScoreRegistryResponse response;
      if (stream_alive && streams[pending->stream]->Read(&response) && response.has_result()) {
        row.line = pending->line;
        row.result = std::move(*response.mutable_result());
      } else {
        // The stream ended early: stop here, keep what was written (--resume
        // continues from it).
        stream_alive = false;
        queue.Abandon();
        break;
      }
    }
    if (row.result.has_error()) ++error_rows;
    if (output_format == OutputFormat::kTable) {
      *rows_out << TableRow(row);
    } else {
      *rows_out << RowText(row, output_format);
    }
    if (report.has_value()) report->Add(row);
    ++written;
    if (progress && absl::Now() - last_progress > absl::Milliseconds(250)) {
      last_progress = absl::Now();
      const double seconds = absl::ToDoubleSeconds(last_progress - started);
      const double rate = seconds > 0 ? written / seconds : 0;
      std::string eta;
      const std::uint64_t done = bytes_read.load(std::memory_order_relaxed);
      if (input_size > 0 && done > 0 && done < input_size) {
        eta = absl::StrFormat(", about %.0f s left", seconds * (input_size - done) / done);
      }
      err << absl::StrFormat("\r%d rows scored, %.0f rows/s%s   ", written, rate, eta)
          << std::flush;
    }
  }
  if (progress) err << "\r" << std::string(60, ' ') << "\r";
  sender.join();
  rows_out->flush();

  // Each stream's summary; the counts added up.
  v1::RunSummary summary;
  grpc::Status status;
  for (std::size_t i = 0; i < n_streams; ++i) {
    v1::ScoreRegistryResponse response;
    // Reads every message left (after an early end they are only drained),
    // so that Finish gets the server's status.
    while (streams[i]->Read(&response)) {
      if (!stream_alive || !response.has_summary()) continue;
      const v1::RunSummary& part = response.summary();
      if (i == 0) {
        summary = part;
        continue;
      }
      summary.set_record_count(summary.record_count() + part.record_count());
      summary.set_error_count(summary.error_count() + part.error_count());
      summary.set_promote_count(summary.promote_count() + part.promote_count());
      summary.set_hold_count(summary.hold_count() + part.hold_count());
      summary.set_reject_count(summary.reject_count() + part.reject_count());
      summary.set_vacuous_count(summary.vacuous_count() + part.vacuous_count());
      summary.set_non_vacuous_count(summary.non_vacuous_count() + part.non_vacuous_count());
    }
    const grpc::Status finished = streams[i]->Finish();
    if (status.ok() && !finished.ok()) status = finished;
  }
  if (status.ok() && !stream_alive) {
    status = grpc::Status(grpc::StatusCode::UNAVAILABLE, "the stream ended before every row");
  }
  if (!status.ok()) {
    err << "riskbound score: the stream ended after " << written << " new rows";
    if (output_file.has_value()) err << " (rerun with --resume " << *output_file << " to go on)";
    err << "\n";
    return ReportRpcError(status, *client_options, err);
  }
  if (!prior_mismatch.empty()) {
    err << "riskbound score: warning: --resume " << *resume
        << " does not match this input: " << prior_mismatch << "\n";
  }

  // The summary, on stderr so that stdout holds only rows.
  const std::uint64_t total = prior.size() + written;
  err << "\n" << total << " rows";
  if (!prior.empty()) err << " (" << prior.size() << " from the earlier run)";
  // Counts of this run's rows (with --resume, of the rows scored now: the
  // report counts the whole file).
  const std::string part = prior.empty() ? "" : "this part: ";
  if (settings.has_gate()) {
    err << " (" << part << summary.promote_count() << " PROMOTE, " << summary.hold_count()
        << " HOLD, " << summary.reject_count() << " REJECT)";
  } else {
    err << " (" << part << summary.non_vacuous_count() << " certified, "
        << summary.vacuous_count() << " vacuous)";
  }
  err << "; " << error_rows << " error rows\n" << summary.statement() << "\n";
  for (const v1::HoldoutSetSpend& s : summary.holdout_sets()) {
    err << "  hold-out set " << s.holdout_set_id() << ": " << s.scored_record_count() << " of "
        << s.declared_record_count() << " records, delta spent "
        << FormatFailureProbability(s.spent_failure_probability()) << "\n";
  }
  PrintCautions(summary.cautions(), err);

  if (report.has_value()) {
    const std::string path = *parsed->Get("report");
    std::ofstream html(path, std::ios::trunc | std::ios::binary);
    html << report->Render(summary, input_path == "-" ? "standard input" : input_path);
    if (!html) return InputError(err, absl::StrCat("cannot write the report to ", path));
    err << "report: " << path << "\n";
  }
  return error_rows > 0 ? kExitRowErrors : kExitOk;
}

}  // namespace riskbound::cli
