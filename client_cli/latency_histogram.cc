#include "client_cli/latency_histogram.h"

#include <algorithm>
#include <cmath>

namespace riskbound::cli {

int LatencyHistogram::BucketOf(std::uint64_t v) {
  if (v < kSubBuckets) return static_cast<int>(v);
  const int msb = 63 - __builtin_clzll(v);
  if (msb >= kMaxBits) return kBucketCount - 1;
  const int shift = msb - kSubBucketBits;  // v >> shift is in [kSubBuckets, 2 kSubBuckets)
  return static_cast<int>((shift + 1) * kSubBuckets + ((v >> shift) - kSubBuckets));
}

std::uint64_t LatencyHistogram::UpperEdge(int bucket) {
  if (bucket < static_cast<int>(kSubBuckets)) return static_cast<std::uint64_t>(bucket);
  const int shift = bucket / static_cast<int>(kSubBuckets) - 1;
  const std::uint64_t mantissa = bucket % kSubBuckets + kSubBuckets;
  return ((mantissa + 1) << shift) - 1;
}

void LatencyHistogram::Record(std::uint64_t nanoseconds) {
  buckets_[BucketOf(nanoseconds)].fetch_add(1, std::memory_order_relaxed);
  count_.fetch_add(1, std::memory_order_relaxed);
  std::uint64_t seen = max_.load(std::memory_order_relaxed);
  while (nanoseconds > seen &&
         !max_.compare_exchange_weak(seen, nanoseconds, std::memory_order_relaxed)) {
  }
}

std::uint64_t LatencyHistogram::Percentile(double q) const {
  const std::uint64_t total = count();
  if (total == 0) return 0;
  const auto rank = std::max<std::uint64_t>(
      1, static_cast<std::uint64_t>(std::ceil(q * static_cast<double>(total))));
  std::uint64_t seen = 0;
  for (int b = 0; b < kBucketCount; ++b) {
    seen += buckets_[b].load(std::memory_order_relaxed);
    if (seen >= rank) return std::min(UpperEdge(b), max_nanoseconds());
  }
  return max_nanoseconds();
}

}  // namespace riskbound::cli
