#include "service/rpc/metrics.h"

#include <cmath>
#include <cstdlib>
#include <string_view>
#include <tuple>
#include <utility>

#include "absl/strings/str_cat.h"
#include "absl/strings/str_format.h"

namespace riskbound::rpc {
namespace {

// A number as the text format writes it: integers without a fraction,
// others with enough digits to round-trip.
std::string Number(double value) {
  if (std::isinf(value)) return value > 0 ? "+Inf" : "-Inf";
  if (value == std::floor(value) && std::fabs(value) < 1e15) {
    return absl::StrFormat("%.0f", value);
  }
  for (int digits = 15; digits < 17; ++digits) {  // the shortest that reads back exactly
    std::string text = absl::StrFormat("%.*g", digits, value);
    if (std::strtod(text.c_str(), nullptr) == value) return text;
  }
  return absl::StrFormat("%.17g", value);
}

void Header(std::string* out, const char* name, const char* type, const char* help) {
  absl::StrAppend(out, "# HELP ", name, " ", help, "\n# TYPE ", name, " ", type, "\n");
}

// ++map[key] without building a key string when the key is already there.
template <class Map, class Key>
void Increment(Map& map, const Key& key) {
  auto it = map.find(key);
  if (it == map.end()) it = map.emplace(typename Map::key_type(key), 0).first;
  ++it->second;
}

// absl::StatusCodeToString's names, built once (it returns a new string).
std::string_view CodeName(absl::StatusCode code) {
  static const auto* const kNames = [] {
    auto* names = new std::array<std::string, 17>;
    for (int c = 0; c < 17; ++c) (*names)[c] = absl::StatusCodeToString(absl::StatusCode(c));
    return names;
  }();
  const int c = static_cast<int>(code);
  if (c < 0 || c >= 17) return "";  // as absl::StatusCodeToString
  return (*kNames)[c];
}

}  // namespace

std::string PrometheusLabelValue(const std::string& value) {
  std::string out;
  out.reserve(value.size());
  for (char c : value) {
    if (c == '\\') {
      out += "\\\\";
    } else if (c == '"') {
      out += "\\\"";
    } else if (c == '\n') {
      out += "\\n";
    } else {
      out += c;
    }
  }
  return out;
}

Metrics::Metrics(std::string version, std::string commit, std::function<int()> in_flight)
    : version_(std::move(version)), commit_(std::move(commit)), in_flight_(std::move(in_flight)) {}

void Metrics::RecordCall(const char* transport, const char* rpc, absl::StatusCode code,
                         absl::Duration latency) {
  const double seconds = absl::ToDoubleSeconds(latency);
  const std::string_view rpc_name(rpc);
  absl::MutexLock lock(&mu_);
  {
    const CallKeyView key(transport, rpc_name, CodeName(code));
    auto it = calls_.find(key);
    if (it == calls_.end()) {
      it = calls_
               .emplace(std::make_tuple(std::string(transport), std::string(rpc_name),
                                        std::string(CodeName(code))),
                        0)
               .first;
    }
    ++it->second;
  }
  auto found = latency_.find(rpc_name);
  if (found == latency_.end()) found = latency_.emplace(std::string(rpc_name), Histogram{}).first;
  Histogram& h = found->second;
  for (std::size_t i = 0; i < kLatencyBuckets.size(); ++i) {
    if (seconds <= kLatencyBuckets[i]) {
      ++h.buckets[i];
      break;
    }
  }
  ++h.count;
  h.sum += seconds;
}

void Metrics::RecordRefusal(const char* reason) {
  absl::MutexLock lock(&mu_);
  Increment(refusals_, std::string_view(reason));
}

void Metrics::RecordVerdict(const std::string& verdict) {
  absl::MutexLock lock(&mu_);
  Increment(verdicts_, verdict);
}

void Metrics::RecordCertificate(const std::string& family) {
  absl::MutexLock lock(&mu_);
  Increment(certificates_, family);
}

void Metrics::SetLimit(const std::string& name, double value) {
  absl::MutexLock lock(&mu_);
  limits_[name] = value;
}

std::string Metrics::Render() const {
  std::string out;
  Header(&out, "riskbound_build_info", "gauge",
         "Build of the running server: engine version and source commit (always 1).");
  absl::StrAppend(&out, "riskbound_build_info{version=\"", PrometheusLabelValue(version_),
                  "\",commit=\"", PrometheusLabelValue(commit_), "\"} 1\n");
  if (in_flight_) {
    Header(&out, "riskbound_calls_in_flight", "gauge",
           "Calls admitted (computing or waiting for a thread) and not yet answered.");
    absl::StrAppend(&out, "riskbound_calls_in_flight ", in_flight_(), "\n");
  }
  absl::MutexLock lock(&mu_);
  Header(&out, "riskbound_limit", "gauge",
         "Limits in force (server flags): threads, max_pending_calls, max_call_seconds, "
         "max_request_bytes, max_response_bytes.");
  for (const auto& [name, value] : limits_) {
    absl::StrAppend(&out, "riskbound_limit{name=\"", PrometheusLabelValue(name), "\"} ",
                    Number(value), "\n");
  }
  Header(&out, "riskbound_calls_total", "counter",
         "Finished calls by transport (grpc, http), method and status code.");
  for (const auto& [key, count] : calls_) {
    const auto& [transport, rpc, code] = key;
    absl::StrAppend(&out, "riskbound_calls_total{transport=\"", PrometheusLabelValue(transport),
                    "\",rpc=\"", PrometheusLabelValue(rpc), "\",code=\"",
                    PrometheusLabelValue(code), "\"} ", count, "\n");
  }
  Header(&out, "riskbound_call_duration_seconds", "histogram",
         "Time from admission to answer, by method.");
  for (const auto& [rpc, h] : latency_) {
    const std::string label = PrometheusLabelValue(rpc);
    std::uint64_t cumulative = 0;
    for (std::size_t i = 0; i < kLatencyBuckets.size(); ++i) {
      cumulative += h.buckets[i];
      absl::StrAppend(&out, "riskbound_call_duration_seconds_bucket{rpc=\"", label, "\",le=\"",
                      Number(kLatencyBuckets[i]), "\"} ", cumulative, "\n");
    }
    absl::StrAppend(&out, "riskbound_call_duration_seconds_bucket{rpc=\"", label,
                    "\",le=\"+Inf\"} ", h.count, "\n");
    absl::StrAppend(&out, "riskbound_call_duration_seconds_sum{rpc=\"", label, "\"} ",
                    Number(h.sum), "\n");
    absl::StrAppend(&out, "riskbound_call_duration_seconds_count{rpc=\"", label, "\"} ", h.count,
                    "\n");
  }
  Header(&out, "riskbound_calls_refused_total", "counter",
         "Calls refused by a limit before or instead of an answer, by reason.");
  for (const auto& [reason, count] : refusals_) {
    absl::StrAppend(&out, "riskbound_calls_refused_total{reason=\"",
                    PrometheusLabelValue(reason), "\"} ", count, "\n");
  }
  Header(&out, "riskbound_gate_verdicts_total", "counter", "Gate verdicts given, by verdict.");
  for (const auto& [verdict, count] : verdicts_) {
    absl::StrAppend(&out, "riskbound_gate_verdicts_total{verdict=\"",
                    PrometheusLabelValue(verdict), "\"} ", count, "\n");
  }
  Header(&out, "riskbound_certificates_total", "counter",
         "Certificates computed by Certify, by bound family.");
  for (const auto& [family, count] : certificates_) {
    absl::StrAppend(&out, "riskbound_certificates_total{family=\"",
                    PrometheusLabelValue(family), "\"} ", count, "\n");
  }
  return out;
}

}  // namespace riskbound::rpc
