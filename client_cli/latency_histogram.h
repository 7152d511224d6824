// LatencyHistogram: call latencies of `riskbound bench`, recorded from many
// threads without a lock, read as nearest-rank percentiles.
//
// Buckets are log-linear: exact below 128 ns, then 128 buckets per power of
// two, so a bucket's width is at most 1/128 of its lower edge. A percentile is
// reported as the upper edge of the bucket holding the nearest-rank value
// (never below the exact value, at most 0.8 % above it), and never above the
// exact maximum, which is kept separately.
#ifndef RISKBOUND_CLIENT_CLI_LATENCY_HISTOGRAM_H_
#define RISKBOUND_CLIENT_CLI_LATENCY_HISTOGRAM_H_

#include <array>
#include <atomic>
#include <cstdint>

namespace riskbound::cli {

class LatencyHistogram {
 public:
  static constexpr int kSubBucketBits = 7;
  static constexpr std::uint64_t kSubBuckets = std::uint64_t{1} << kSubBucketBits;
  // Values at or above 2^40 ns (about 18 minutes) share the last bucket.
  static constexpr int kMaxBits = 40;
  static constexpr int kBucketCount = (kMaxBits - kSubBucketBits + 1) * kSubBuckets;

  LatencyHistogram() = default;
  LatencyHistogram(const LatencyHistogram&) = delete;
  LatencyHistogram& operator=(const LatencyHistogram&) = delete;

  // Record
  // Adds one latency in nanoseconds. Thread-safe, lock-free.
  void Record(std::uint64_t nanoseconds);

  // count / max_nanoseconds
  // Values recorded so far, and the largest (0 when none). Read after the
  // recording threads are done (or accept a value in motion).
  std::uint64_t count() const { return count_.load(std::memory_order_relaxed); }
  std::uint64_t max_nanoseconds() const { return max_.load(std::memory_order_relaxed); }

  // Percentile
  // The nearest-rank q-quantile (the smallest recorded value v with at least
  // ceil(q * count) values <= v), as the upper edge of its bucket capped at
  // the maximum. REQUIRES: 0 < q <= 1. 0 when nothing was recorded.
  std::uint64_t Percentile(double q) const;

  // BucketOf / UpperEdge
  // The bucket of a value, and the largest value in a bucket. Exposed for tests.
  static int BucketOf(std::uint64_t nanoseconds);
  static std::uint64_t UpperEdge(int bucket);

 private:
  std::array<std::atomic<std::uint64_t>, kBucketCount> buckets_{};
  std::atomic<std::uint64_t> count_{0};
  std::atomic<std::uint64_t> max_{0};
};

}  // namespace riskbound::cli

#endif  // RISKBOUND_CLIENT_CLI_LATENCY_HISTOGRAM_H_
