// riskbound bench: a load generator. Keeps --concurrency calls in flight
// (gRPC callback API, requests encoded once before the run) against one RPC
// or a fixed mix, and always measures, in the same run and at the same
// concurrency, the gRPC health check (grpc.health.v1.Health/Check) as the
// transport baseline; prints throughput, latency percentiles and error
// counts for both, and the ratio of their throughputs.
//
// Baseline and load run as separate phases in rounds, in the order
// health, RPC, RPC, health, health, RPC, ... (each kind first in half of
// the rounds), so drift in the machine's load affects both alike; each
// phase gets its share of --requests or --duration.
#include <sys/resource.h>

#include <algorithm>
#include <array>
#include <atomic>
#include <chrono>
#include <cstdint>
#include <future>
#include <memory>
#include <optional>
#include <string>
#include <type_traits>
#include <vector>

#include "absl/strings/str_cat.h"
#include "absl/strings/str_format.h"
#include "absl/strings/str_join.h"
#include "absl/synchronization/mutex.h"
#include "absl/time/time.h"
#include "client_cli/args.h"
#include "client_cli/bench_payloads.h"
#include "client_cli/client.h"
#include "client_cli/command_start.h"
#include "client_cli/commands.h"
#include "client_cli/exit_codes.h"
#include "client_cli/json_io.h"
#include "client_cli/latency_histogram.h"
#include "client_cli/table.h"
#include "google/protobuf/message.h"
#include "grpcpp/generic/generic_stub.h"
#include "grpcpp/support/byte_buffer.h"
#include "riskbound/v1/riskbound.grpc.pb.h"

namespace riskbound::cli {
namespace {

constexpr char kName[] = "bench";

// One RPC the bench can send.
struct Method {
  const char* word;  // --rpc word and row label (the CLI command's name)
  const char* path;  // the gRPC method
  // The request message; nullptr for the health check (empty request).
  const google::protobuf::Descriptor* (*request_type)();
  const char* builtin_json;  // the built-in payload
  const char* builtin_source;
};

template <class M>
const google::protobuf::Descriptor* DescriptorOf() {
  return M::descriptor();
}

enum MethodId : int {
  kHealth = 0,
  kCertify,
  kGate,
  kPlan,
  kSelect,
  kCapacity,
  kFamilies,
  kEffectiveVc,
  kMethodCount
};

const std::array<Method, kMethodCount>& Methods() {
  static const std::array<Method, kMethodCount> kMethods = {{
      {"health", "/grpc.health.v1.Health/Check", nullptr, "", "the empty HealthCheckRequest"},
      {"certify", "/riskbound.v1.RiskBound/Certify", &DescriptorOf<v1::CertifyRequest>,
       bench_payloads::kCertify, bench_payloads::kCertifySource},
      {"gate", "/riskbound.v1.RiskBound/Gate", &DescriptorOf<v1::GateRequest>,
       bench_payloads::kGate, bench_payloads::kGateSource},
      {"plan", "/riskbound.v1.RiskBound/PlanSamples", &DescriptorOf<v1::PlanSamplesRequest>,
       bench_payloads::kPlan, bench_payloads::kPlanSource},
      {"select", "/riskbound.v1.RiskBound/SelectStructure",
       &DescriptorOf<v1::SelectStructureRequest>, bench_payloads::kSelect,
       bench_payloads::kSelectSource},
      {"capacity", "/riskbound.v1.RiskBound/EstimateCapacity",
       &DescriptorOf<v1::EstimateCapacityRequest>, bench_payloads::kCapacity,
       bench_payloads::kCapacitySource},
      {"families", "/riskbound.v1.RiskBound/ListFamilies", &DescriptorOf<v1::ListFamiliesRequest>,
       "{}", "the empty ListFamiliesRequest"},
      {"effective-vc", "/riskbound.v1.RiskBound/FitEffectiveVcDimension",
       &DescriptorOf<v1::FitEffectiveVcDimensionRequest>, bench_payloads::kEffectiveVc,
       bench_payloads::kEffectiveVcSource},
  }};
  return kMethods;
}

// --rpc mixed: this cycle of ten calls, each call taking the next position
// (four Certify and two Gate calls for each of the others, as a registry
// pipeline asks).
constexpr std::array<MethodId, 10> kMixedCycle = {kCertify, kGate, kCertify,  kPlan,    kCertify,
                                                  kSelect,  kGate, kCapacity, kCertify, kFamilies};

constexpr char kUsage[] =
    "riskbound bench [--rpc certify|gate|plan|select|capacity|families|effective-vc|health|mixed]\n"
    "                [--concurrency N] [--channels N] [--requests N | --duration SECONDS]\n"
    "                [--rounds R] [--payload FILE] [--output table|json] [connection options]";
constexpr char kSummary[] =
    "Loads a riskbound-server: keeps --concurrency calls in flight (spread over --channels\n"
    "connections) of one RPC, or of a fixed mix, and measures in the same run, at the same\n"
    "concurrency, the gRPC health check (grpc.health.v1.Health/Check) as the transport\n"
    "baseline: what the server costs beyond answering at all. Baseline and load run as\n"
    "separate phases, in --rounds rounds ordered health, RPC, RPC, health, health, RPC, ...\n"
    "so that drift in the machine's load touches both alike; each phase gets an equal share\n"
    "of --requests (N calls of the RPC and N health checks) or of --duration (the same\n"
    "seconds for each). Before the clock starts, each channel connects and sends each of\n"
    "its requests once; a request the server refuses there is reported as by the other\n"
    "commands (exit 3, 4, 7 or 8) and nothing is measured.\n"
    "\n"
    "Prints, for the baseline and the load (and each RPC of the mix): calls answered OK,\n"
    "calls per second (OK answers over the phases' wall time), latency p50, p90, p99 and\n"
    "max in microseconds (nearest rank, within 0.8 %), errors by status code, and the\n"
    "ratio of the load's throughput to the baseline's. Every error is counted and\n"
    "printed; any error during the run gives exit 9. The payload is a request file in the\n"
    "protobuf JSON mapping (--payload), else a built-in one, the same as a file under\n"
    "examples/fernhill/ (listed by --help below). --rpc mixed cycles through ten calls:\n"
    "certify, gate, certify, plan, certify, select, gate, capacity, certify, families,\n"
    "each with its built-in payload.\n"
    "\n"
    "exit codes: 0 every call answered OK; 9 some calls failed during the run (counted by\n"
    "code); 2 usage; 3, 4, 7, 8 the first call of a request failed (as for every command).";

std::vector<OptionSpec> Specs() {
  std::vector<OptionSpec> specs = {
      {"rpc", "NAME",
       "certify, gate, plan, select, capacity, families, effective-vc, health or mixed "
       "(default certify)"},
      {"concurrency", "N", "calls in flight at once, 1 to 10000 (default 16)"},
      {"channels", "N", "connections the calls are spread over, 1 to --concurrency (default 1)"},
      {"requests", "N", "calls of the RPC, and as many health checks (default 20000)"},
      {"duration", "SECONDS", "instead of --requests: seconds of the RPC, and as many of health"},
      {"rounds", "R", "phases of each kind, alternating as above, 1 to 100 (default 2)"},
      {"payload", "FILE",
       "the request (protobuf JSON mapping) instead of the built-in one; not with --rpc "
       "mixed or health"},
      {"output", "table|json", "output format (default table)"},
  };
  for (const OptionSpec& s : ConnectionOptions()) specs.push_back(s);
  return specs;
}

std::string BuiltinList() {
  std::string out;
  for (const Method& m : Methods()) {
    absl::StrAppend(&out,
                    absl::StrFormat("  %-12s built-in payload: %s\n", m.word, m.builtin_source));
  }
  return out;
}

// ---------------------------------------------------------------------------
// Counting.

constexpr int kCodeCount = 17;  // grpc::StatusCode OK .. UNAUTHENTICATED

const char* CodeName(int code) {
  static constexpr std::array<const char*, kCodeCount> kNames = {"OK",
                                                                 "CANCELLED",
                                                                 "UNKNOWN",
                                                                 "INVALID_ARGUMENT",
                                                                 "DEADLINE_EXCEEDED",
                                                                 "NOT_FOUND",
                                                                 "ALREADY_EXISTS",
                                                                 "PERMISSION_DENIED",
                                                                 "RESOURCE_EXHAUSTED",
                                                                 "FAILED_PRECONDITION",
                                                                 "ABORTED",
                                                                 "OUT_OF_RANGE",
                                                                 "UNIMPLEMENTED",
                                                                 "INTERNAL",
                                                                 "UNAVAILABLE",
                                                                 "DATA_LOSS",
                                                                 "UNAUTHENTICATED"};
  return code >= 0 && code < kCodeCount ? kNames[code] : "UNKNOWN";
}

// The calls of one method in the phases of one kind (baseline or load).
struct MethodStats {
  LatencyHistogram latency;  // OK answers only
  std::array<std::atomic<std::uint64_t>, kCodeCount> codes{};

  std::uint64_t ok() const { return codes[0].load(); }
  std::uint64_t errors() const {
    std::uint64_t n = 0;
    for (int c = 1; c < kCodeCount; ++c) n += codes[c].load();
    return n;
  }
};

// Baseline or load: its phases' wall time and client CPU, and per method.
struct KindStats {
  double seconds = 0;
  double client_cpu_seconds = 0;
  std::array<MethodStats, kMethodCount> methods;
  LatencyHistogram all;  // every OK answer of every method

  std::uint64_t ok() const {
    std::uint64_t n = 0;
    for (const MethodStats& m : methods) n += m.ok();
    return n;
  }
  std::uint64_t errors() const {
    std::uint64_t n = 0;
    for (const MethodStats& m : methods) n += m.errors();
    return n;
  }
};

double ProcessCpuSeconds() {
  rusage usage{};
  getrusage(RUSAGE_SELF, &usage);
  auto sec = [](const timeval& t) { return static_cast<double>(t.tv_sec) + t.tv_usec * 1e-6; };
  return sec(usage.ru_utime) + sec(usage.ru_stime);
}

// ---------------------------------------------------------------------------
// Running.

using Clock = std::chrono::steady_clock;

struct Setup {
  ClientOptions client;
  std::vector<std::unique_ptr<grpc::GenericStub>> stubs;  // one per channel
  std::array<std::string, kMethodCount> encoded;          // request bytes per method
  int concurrency = 16;
};

// One phase: `concurrency` slots, each with one call in flight at a time,
// until `max_calls` calls are issued or `until` has passed.
class Phase {
 public:
  Phase(const Setup& setup, std::vector<MethodId> cycle, std::uint64_t max_calls,
        std::optional<Clock::time_point> until, KindStats* stats)
      : setup_(setup),
        cycle_(std::move(cycle)),
        max_calls_(max_calls),
        until_(until),
        stats_(stats) {
    slots_.reserve(setup.concurrency);
    for (int i = 0; i < setup.concurrency; ++i) {
      auto slot = std::make_unique<Slot>();
      slot->stub = setup.stubs[i % setup.stubs.size()].get();
      for (int m = 0; m < kMethodCount; ++m) {
        grpc::Slice bytes(setup.encoded[m]);
        slot->requests[m] = grpc::ByteBuffer(&bytes, 1);
      }
      slots_.push_back(std::move(slot));
    }
  }

  // Runs the phase to its end; returns its wall time in seconds.
  double Run() {
    const double cpu_before = ProcessCpuSeconds();
    active_.store(static_cast<int>(slots_.size()));
    start_ = Clock::now();
    for (auto& slot : slots_) Next(slot.get());
    done_.get_future().wait();
    const double seconds = std::chrono::duration<double>(end_ - start_).count();
    stats_->seconds += seconds;
    stats_->client_cpu_seconds += ProcessCpuSeconds() - cpu_before;
    return seconds;
  }

 private:
  struct Slot {
    grpc::GenericStub* stub = nullptr;
    std::array<grpc::ByteBuffer, kMethodCount> requests;
    std::unique_ptr<grpc::ClientContext> context;
    grpc::ByteBuffer response;
    MethodId method = kHealth;
    Clock::time_point sent;
  };

  // Sends the slot's next call, or retires the slot when the phase is over.
  void Next(Slot* slot) {
    const std::uint64_t ticket = issued_.fetch_add(1, std::memory_order_relaxed);
    const Clock::time_point now = Clock::now();
    if (ticket >= max_calls_ || (until_.has_value() && now >= *until_)) {
      Retire(now);
      return;
    }
    slot->method = cycle_[ticket % cycle_.size()];
    slot->context = std::make_unique<grpc::ClientContext>();
    slot->context->set_deadline(std::chrono::system_clock::now() +
                                absl::ToChronoMicroseconds(setup_.client.timeout));
    if (slot->method != kHealth) AddCallCredentials(setup_.client, slot->context.get());
    slot->response.Clear();
    slot->sent = Clock::now();
    slot->stub->UnaryCall(slot->context.get(), Methods()[slot->method].path, grpc::StubOptions(),
                          &slot->requests[slot->method], &slot->response,
                          [this, slot](const grpc::Status& status) { Done(slot, status); });
  }

  void Done(Slot* slot, const grpc::Status& status) {
    const Clock::time_point now = Clock::now();
    MethodStats& m = stats_->methods[slot->method];
    const int code = static_cast<int>(status.error_code());
    m.codes[code >= 0 && code < kCodeCount ? code : 2].fetch_add(1, std::memory_order_relaxed);
    if (status.ok()) {
      const auto nanoseconds = static_cast<std::uint64_t>(
          std::chrono::duration_cast<std::chrono::nanoseconds>(now - slot->sent).count());
      m.latency.Record(nanoseconds);
      if (cycle_.size() > 1) stats_->all.Record(nanoseconds);
    }
    Next(slot);
  }

  void Retire(Clock::time_point now) {
    {
      absl::MutexLock lock(&mu_);
      end_ = std::max(end_, now);
    }
    if (active_.fetch_sub(1) == 1) done_.set_value();
  }

  const Setup& setup_;
  const std::vector<MethodId> cycle_;
  const std::uint64_t max_calls_;
  const std::optional<Clock::time_point> until_;
  KindStats* const stats_;
  std::vector<std::unique_ptr<Slot>> slots_;
  std::atomic<std::uint64_t> issued_{0};
  std::atomic<int> active_{0};
  Clock::time_point start_;
  absl::Mutex mu_;
  Clock::time_point end_ ABSL_GUARDED_BY(mu_);
  std::promise<void> done_;
};

// ---------------------------------------------------------------------------
// Reporting.

double Micros(std::uint64_t nanoseconds) { return static_cast<double>(nanoseconds) / 1000.0; }

struct Row {
  std::string label;
  std::uint64_t ok = 0;
  std::uint64_t errors = 0;
  double calls_per_second = 0;
  double p50_us = 0, p90_us = 0, p99_us = 0, max_us = 0;
  std::array<std::uint64_t, kCodeCount> codes{};  // [0] unused
};

Row RowOf(const std::string& label, std::uint64_t ok, std::uint64_t errors,
          const LatencyHistogram& latency, double seconds) {
  Row r;
  r.label = label;
  r.ok = ok;
  r.errors = errors;
  r.calls_per_second = seconds > 0 ? static_cast<double>(r.ok) / seconds : 0;
  r.p50_us = Micros(latency.Percentile(0.50));
  r.p90_us = Micros(latency.Percentile(0.90));
  r.p99_us = Micros(latency.Percentile(0.99));
  r.max_us = Micros(latency.max_nanoseconds());
  return r;
}

Row RowOf(const std::string& label, const MethodStats& m, double seconds) {
  Row r = RowOf(label, m.ok(), m.errors(), m.latency, seconds);
  for (int c = 1; c < kCodeCount; ++c) r.codes[c] = m.codes[c].load();
  return r;
}

// The whole load as one row (for the mix: every method together).
Row LoadRow(const std::string& label, const KindStats& load, const std::vector<MethodId>& cycle) {
  if (cycle.size() == 1) return RowOf(label, load.methods[cycle[0]], load.seconds);
  Row r = RowOf(label, load.ok(), load.errors(), load.all, load.seconds);
  for (const MethodStats& m : load.methods) {
    for (int c = 1; c < kCodeCount; ++c) r.codes[c] += m.codes[c].load();
  }
  return r;
}

std::string Fixed1(double x) { return absl::StrFormat("%.1f", x); }

std::string ErrorsByCode(const KindStats& baseline, const KindStats& load) {
  std::vector<std::string> parts;
  for (const KindStats* k : {&baseline, &load}) {
    for (int m = 0; m < kMethodCount; ++m) {
      for (int c = 1; c < kCodeCount; ++c) {
        const std::uint64_t n = k->methods[m].codes[c].load();
        if (n > 0) {
          parts.push_back(absl::StrCat(k == &baseline ? "baseline " : "", Methods()[m].word, " ",
                                       CodeName(c), " ", n));
        }
      }
    }
  }
  return parts.empty() ? "none" : absl::StrJoin(parts, ", ");
}

std::string JsonRow(const Row& r, const std::string& label) {
  std::string out = absl::StrCat(
      "{\"rpc\": \"", label, "\", \"ok_count\": ", r.ok, ", \"error_count\": ", r.errors,
      ", \"calls_per_second\": ", Fixed1(r.calls_per_second), ", \"p50_us\": ", Fixed1(r.p50_us),
      ", \"p90_us\": ", Fixed1(r.p90_us), ", \"p99_us\": ", Fixed1(r.p99_us),
      ", \"max_us\": ", Fixed1(r.max_us));
  std::vector<std::string> codes;
  for (int c = 1; c < kCodeCount; ++c) {
    if (r.codes[c] > 0) codes.push_back(absl::StrCat("\"", CodeName(c), "\": ", r.codes[c]));
  }
  absl::StrAppend(&out, ", \"error_counts\": {", absl::StrJoin(codes, ", "), "}}");
  return out;
}

// ---------------------------------------------------------------------------
// Flags.

struct BenchFlags {
  std::vector<MethodId> cycle;  // the load's methods, in calling order
  std::string rpc_word;
  std::optional<std::string> payload;
  int concurrency = 16;
  int channels = 1;
  std::uint64_t requests = 20000;
  std::optional<double> duration_seconds;
  int rounds = 2;
};

std::optional<std::string> ReadFlags(const ParsedArgs& args, BenchFlags* f) {
  f->rpc_word = args.Get("rpc").value_or("certify");
  if (f->rpc_word == "mixed") {
    f->cycle.assign(kMixedCycle.begin(), kMixedCycle.end());
  } else {
    for (int m = 0; m < kMethodCount; ++m) {
      if (f->rpc_word == Methods()[m].word) f->cycle = {static_cast<MethodId>(m)};
    }
    if (f->cycle.empty()) {
      std::vector<std::string> words;
      for (const Method& m : Methods()) {
        if (std::string(m.word) != "health") words.push_back(m.word);
      }
      words.push_back("health");
      words.push_back("mixed");
      return absl::StrCat("--rpc: unknown RPC '", f->rpc_word, "'; one of ",
                          absl::StrJoin(words, ", "));
    }
  }
  f->payload = args.Get("payload");
  if (f->payload.has_value() && (f->rpc_word == "mixed" || f->rpc_word == "health")) {
    return absl::StrCat("--payload goes with one RPC other than health, not --rpc ", f->rpc_word);
  }
  auto integer = [&args](const char* flag, std::uint64_t low, std::uint64_t high,
                         auto* out) -> std::optional<std::string> {
    auto value = args.GetUint64(flag);
    if (!value.ok()) return std::string(value.status().message());
    if (!value->has_value()) return std::nullopt;
    if (**value < low || **value > high) {
      return absl::StrCat("--", flag, ": must be from ", low, " to ", high, ", got ", **value);
    }
    *out = static_cast<std::remove_pointer_t<decltype(out)>>(**value);
    return std::nullopt;
  };
  if (auto e = integer("concurrency", 1, 10000, &f->concurrency)) return e;
  if (auto e = integer("channels", 1, 10000, &f->channels)) return e;
  if (f->channels > f->concurrency) {
    return absl::StrCat("--channels (", f->channels, ") must be at most --concurrency (",
                        f->concurrency, ")");
  }
  if (auto e = integer("rounds", 1, 100, &f->rounds)) return e;
  if (args.Has("requests") && args.Has("duration")) {
    return std::string("--requests and --duration: choose one");
  }
  if (auto e = integer("requests", 1, std::uint64_t{1} << 40, &f->requests)) return e;
  auto duration = args.GetDouble("duration");
  if (!duration.ok()) return std::string(duration.status().message());
  if (duration->has_value()) {
    if (**duration <= 0 || **duration > 86400) {
      return std::string("--duration: must be > 0 and at most 86400 seconds");
    }
    f->duration_seconds = **duration;
  }
  if (!f->duration_seconds.has_value() && f->requests < static_cast<std::uint64_t>(f->rounds)) {
    return absl::StrCat("--requests (", f->requests, ") must be at least --rounds (", f->rounds,
                        ")");
  }
  return std::nullopt;
}

// The request bytes of method `m`: the payload file's, or the built-in one's.
std::optional<int> Encode(MethodId m, const std::optional<std::string>& payload, std::string* bytes,
                          std::ostream& err) {
  const Method& method = Methods()[m];
  if (method.request_type == nullptr) {  // HealthCheckRequest{service: ""}: no bytes
    bytes->clear();
    return std::nullopt;
  }
  std::unique_ptr<google::protobuf::Message> message(
      google::protobuf::MessageFactory::generated_factory()
          ->GetPrototype(method.request_type())
          ->New());
  if (payload.has_value()) {
    if (auto failed = LoadJsonInput(kName, *payload, message.get(), err)) return failed;
  } else {
    const absl::Status parsed =
        ParseJson(method.builtin_json, method.builtin_source, message.get());
    if (!parsed.ok()) {  // a build whose example files do not parse
      err << "riskbound bench: built-in payload: " << parsed.message() << "\n";
      return kExitInternal;
    }
  }
  message->SerializeToString(bytes);
  return std::nullopt;
}

// Before the clock: one call of each method on each channel (connects the
// channel, warms the server). Returns the first failure's exit code.
std::optional<int> Preflight(const Setup& setup, const std::vector<MethodId>& used,
                             std::ostream& err) {
  for (const auto& stub : setup.stubs) {
    for (MethodId m : used) {
      grpc::ClientContext context;
      context.set_deadline(std::chrono::system_clock::now() +
                           absl::ToChronoMicroseconds(setup.client.timeout));
      if (m != kHealth) AddCallCredentials(setup.client, &context);
      grpc::Slice bytes(setup.encoded[m]);
      const grpc::ByteBuffer request(&bytes, 1);
      grpc::ByteBuffer response;
      std::promise<grpc::Status> done;
      stub->UnaryCall(&context, Methods()[m].path, grpc::StubOptions(), &request, &response,
                      [&done](grpc::Status s) { done.set_value(std::move(s)); });
      const grpc::Status status = done.get_future().get();
      if (!status.ok()) {
        err << "riskbound bench: the first " << Methods()[m].word
            << " call failed, nothing was measured\n";
        return ReportRpcError(status, setup.client, err);
      }
    }
  }
  return std::nullopt;
}

}  // namespace

int RunBench(const std::vector<std::string>& args, std::ostream& out, std::ostream& err) {
  CommandStart start;
  if (auto done =
          StartCommand(kName, kUsage, kSummary, Specs(), args, out, err, &start, BuiltinList())) {
    return *done;
  }
  BenchFlags flags;
  if (auto message = ReadFlags(start.args, &flags)) return UsageError(err, kName, *message);

  Setup setup;
  setup.client = start.client;
  setup.concurrency = flags.concurrency;
  std::vector<MethodId> used = flags.cycle;
  std::sort(used.begin(), used.end());
  used.erase(std::unique(used.begin(), used.end()), used.end());
  if (used.front() != kHealth) used.insert(used.begin(), kHealth);
  for (MethodId m : used) {
    if (auto failed = Encode(m, flags.payload, &setup.encoded[m], err)) return *failed;
  }
  for (int c = 0; c < flags.channels; ++c) {
    setup.stubs.push_back(
        std::make_unique<grpc::GenericStub>(MakeChannel(setup.client, /*own_connection=*/true)));
  }
  if (auto failed = Preflight(setup, used, err)) return *failed;

  // The phases, in rounds: health first in even rounds, the load first in odd ones.
  auto baseline = std::make_unique<KindStats>();
  auto load = std::make_unique<KindStats>();
  for (int round = 0; round < flags.rounds; ++round) {
    for (int half = 0; half < 2; ++half) {
      const bool health = (half == 0) == (round % 2 == 0);
      std::uint64_t calls = ~std::uint64_t{0};
      std::optional<Clock::time_point> until;
      if (flags.duration_seconds.has_value()) {
        until = Clock::now() +
                std::chrono::duration_cast<Clock::duration>(
                    std::chrono::duration<double>(*flags.duration_seconds / flags.rounds));
      } else {
        calls = flags.requests / flags.rounds +
                (round < static_cast<int>(flags.requests % flags.rounds) ? 1 : 0);
      }
      Phase phase(setup, health ? std::vector<MethodId>{kHealth} : flags.cycle, calls, until,
                  health ? baseline.get() : load.get());
      phase.Run();
    }
  }

  const Row base_row = RowOf("health", baseline->methods[kHealth], baseline->seconds);
  const Row load_row = LoadRow(flags.rpc_word, *load, flags.cycle);
  std::vector<Row> per_method;  // the mix's own rows
  std::vector<MethodId> mix_methods;
  if (flags.cycle.size() > 1) {
    for (MethodId m : used) {
      if (m == kHealth) continue;
      mix_methods.push_back(m);
      per_method.push_back(
          RowOf(absl::StrCat("  ", Methods()[m].word), load->methods[m], load->seconds));
    }
  }
  const double ratio =
      base_row.calls_per_second > 0 ? load_row.calls_per_second / base_row.calls_per_second : 0;
  const std::uint64_t errors = baseline->errors() + load->errors();
  const std::string payload =
      flags.payload.has_value()
          ? *flags.payload
          : (flags.cycle.size() > 1
                 ? std::string("built-in (the mix)")
                 : absl::StrCat("built-in (", Methods()[flags.cycle[0]].builtin_source, ")"));
  const std::string size =
      flags.duration_seconds.has_value()
          ? absl::StrCat(Fixed1(*flags.duration_seconds / flags.rounds), " s per phase")
          : absl::StrCat(flags.requests / flags.rounds, " calls per phase");

  if (start.json) {
    out << "{\n  \"rpc\": \"" << flags.rpc_word << "\",\n  \"server\": \"" << setup.client.server
        << "\",\n  \"concurrency\": " << flags.concurrency
        << ",\n  \"channels\": " << flags.channels << ",\n  \"rounds\": " << flags.rounds
        << ",\n  \"baseline\": " << JsonRow(base_row, "health")
        << ",\n  \"load\": " << JsonRow(load_row, flags.rpc_word);
    if (!per_method.empty()) {
      out << ",\n  \"mix\": [\n";
      for (std::size_t i = 0; i < per_method.size(); ++i) {
        out << "    " << JsonRow(per_method[i], Methods()[mix_methods[i]].word)
            << (i + 1 < per_method.size() ? ",\n" : "\n");
      }
      out << "  ]";
    }
    out << ",\n  \"throughput_ratio\": " << absl::StrFormat("%.3f", ratio)
        << ",\n  \"error_count\": " << errors
        // Microseconds: a short phase of a fast server lasts a few
        // milliseconds, where three decimals would be off by percents.
        << ",\n  \"baseline_seconds\": " << absl::StrFormat("%.6f", baseline->seconds)
        << ",\n  \"load_seconds\": " << absl::StrFormat("%.6f", load->seconds)
        << ",\n  \"client_cpu_seconds\": "
        << absl::StrFormat("%.6f", baseline->client_cpu_seconds + load->client_cpu_seconds)
        << "\n}\n";
  } else {
    out << "riskbound bench: " << flags.rpc_word << " against " << setup.client.server << ", "
        << flags.concurrency << " calls in flight on " << flags.channels
        << (flags.channels == 1 ? " channel\n" : " channels\n");
    out << "payload: " << payload << "\n";
    out << flags.rounds << (flags.rounds == 1 ? " round" : " rounds") << " of health and "
        << flags.rpc_word << " phases, " << size << "\n\n";
    Table table({"rpc", "ok", "errors", "calls/s", "p50_us", "p90_us", "p99_us", "max_us"});
    auto add = [&table](const Row& r) {
      table.AddRow({r.label, absl::StrCat(r.ok), absl::StrCat(r.errors), Fixed1(r.calls_per_second),
                    Fixed1(r.p50_us), Fixed1(r.p90_us), Fixed1(r.p99_us), Fixed1(r.max_us)});
    };
    add(base_row);
    add(load_row);
    for (const Row& r : per_method) add(r);
    out << table.Render();
    out << "\nthroughput ratio " << flags.rpc_word << "/health: " << absl::StrFormat("%.3f", ratio)
        << "\n";
    out << "errors by code: " << ErrorsByCode(*baseline, *load) << "\n";
  }
  if (errors > 0) {
    err << "riskbound bench: " << errors << " of " << (baseline->ok() + load->ok() + errors)
        << " calls failed (counted by code above)\n";
    return kExitBenchErrors;
  }
  return kExitOk;
}

}  // namespace riskbound::cli
