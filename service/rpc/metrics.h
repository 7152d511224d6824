// Metrics: what the server counts about itself, rendered in the Prometheus
// text exposition format (version 0.0.4, an open standard) for a scraper.
//
// Counted: calls by transport, method and status code; latency histograms by
// method; gate verdicts; certificates by bound family; calls refused by a
// limit; calls admitted and not yet answered; the limits in force; build
// information (version, commit).
#ifndef RISKBOUND_SERVICE_RPC_METRICS_H_
#define RISKBOUND_SERVICE_RPC_METRICS_H_

#include <array>
#include <cstdint>
#include <functional>
#include <map>
#include <string>
#include <string_view>
#include <tuple>
#include <utility>
#include <vector>

#include "absl/base/thread_annotations.h"
#include "absl/status/status.h"
#include "absl/synchronization/mutex.h"
#include "absl/time/time.h"

namespace riskbound::rpc {

// Upper bounds (seconds) of the latency histogram's buckets; +Inf is implied.
inline constexpr std::array<double, 16> kLatencyBuckets = {
    0.0001, 0.00025, 0.0005, 0.001, 0.0025, 0.005, 0.01, 0.025,
    0.05,   0.1,     0.25,   0.5,   1.0,   2.5,   5.0,  10.0};

class Metrics {
 public:
  // `in_flight` reports the calls admitted and not yet answered at scrape
  // time (may be empty: the gauge is then left out).
  Metrics(std::string version, std::string commit, std::function<int()> in_flight = {});

  // RecordCall
  // One finished call: its transport ("grpc" or "http"), method, status code
  // and latency. Thread-safe.
  void RecordCall(const char* transport, const char* rpc, absl::StatusCode code,
                  absl::Duration latency);

  // RecordRefusal
  // One call refused by a limit before it ran: `reason` is "busy",
  // "draining", "response_too_large", "deadline" or "unauthenticated".
  // Thread-safe.
  void RecordRefusal(const char* reason);

  // RecordVerdict / RecordCertificate: what answers said. Thread-safe.
  void RecordVerdict(const std::string& verdict);
  void RecordCertificate(const std::string& family);

  // SetLimit
  // A limit in force, exposed as riskbound_limit{name="..."}. Thread-safe.
  void SetLimit(const std::string& name, double value);

  // Render
  // Every metric in the Prometheus text format, families and label sets in a
  // fixed (sorted) order. Thread-safe.
  std::string Render() const;

 private:
  struct Histogram {
    std::array<std::uint64_t, kLatencyBuckets.size()> buckets{};  // not cumulative
    std::uint64_t count = 0;
    double sum = 0.0;
  };

  // Constant after construction.
  const std::string version_;
  const std::string commit_;
  const std::function<int()> in_flight_;

  mutable absl::Mutex mu_;
  // Transparent comparators: a call finds its counters by string views, and
  // allocates key strings only for a label set's first call. The call key's
  // comparator compares views explicitly: std::less<> on a tuple of strings
  // against a tuple of views does not compile with every standard library
  // and compiler pair (clang 14 with libstdc++ 12 refuses it).
  using CallKey = std::tuple<std::string, std::string, std::string>;
  using CallKeyView = std::tuple<std::string_view, std::string_view, std::string_view>;
  struct CallKeyLess {
    using is_transparent = void;
    static CallKeyView View(const CallKey& k) {
      return {std::get<0>(k), std::get<1>(k), std::get<2>(k)};
    }
    static const CallKeyView& View(const CallKeyView& k) { return k; }
    template <typename A, typename B>
    bool operator()(const A& a, const B& b) const {
      return View(a) < View(b);
    }
  };
  std::map<CallKey, std::uint64_t, CallKeyLess> calls_ ABSL_GUARDED_BY(mu_);
  std::map<std::string, Histogram, std::less<>> latency_ ABSL_GUARDED_BY(mu_);
  std::map<std::string, std::uint64_t, std::less<>> refusals_ ABSL_GUARDED_BY(mu_);
  std::map<std::string, std::uint64_t, std::less<>> verdicts_ ABSL_GUARDED_BY(mu_);
  std::map<std::string, std::uint64_t, std::less<>> certificates_ ABSL_GUARDED_BY(mu_);
  std::map<std::string, double> limits_ ABSL_GUARDED_BY(mu_);
};

// PrometheusLabelValue
// `value` escaped for a label value of the text format (backslash, double
// quote and newline). Exposed for tests.
std::string PrometheusLabelValue(const std::string& value);

}  // namespace riskbound::rpc

#endif  // RISKBOUND_SERVICE_RPC_METRICS_H_
