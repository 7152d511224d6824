// LatencyHistogram (client_cli/latency_histogram.h) against brute force: the
// nearest-rank percentile of the sorted values, computed here directly.
#include "client_cli/latency_histogram.h"

#include <algorithm>
#include <cmath>
#include <cstdint>
#include <random>
#include <thread>
#include <vector>

#include "gtest/gtest.h"

namespace riskbound::cli {
namespace {

// Source: brute force, the nearest-rank definition (the smallest value with at
// least ceil(q n) values at or below it) on the sorted values.
std::uint64_t NearestRank(std::vector<std::uint64_t> values, double q) {
  std::sort(values.begin(), values.end());
  const auto rank = std::max<std::size_t>(
      1, static_cast<std::size_t>(std::ceil(q * static_cast<double>(values.size()))));
  return values[rank - 1];
}

TEST(LatencyHistogramTest, BucketsCoverEveryValueOnce) {
  // Source: brute force over every value below 2^16 and around each power of two.
  std::uint64_t previous_edge = 0;
  for (int b = 0; b < 2000; ++b) {
    const std::uint64_t edge = LatencyHistogram::UpperEdge(b);
    if (b > 0) {
      EXPECT_GT(edge, previous_edge) << b;
    }
    EXPECT_EQ(LatencyHistogram::BucketOf(edge), b) << b;
    EXPECT_EQ(LatencyHistogram::BucketOf(edge + 1), b + 1) << b;
    previous_edge = edge;
  }
  for (std::uint64_t v = 0; v < (1u << 16); ++v) {
    const int b = LatencyHistogram::BucketOf(v);
    EXPECT_LE(v, LatencyHistogram::UpperEdge(b));
    if (b > 0) {
      EXPECT_GT(v, LatencyHistogram::UpperEdge(b - 1));
    }
  }
}

TEST(LatencyHistogramTest, PercentilesWithinABucketOfTheExactOnes) {
  std::mt19937_64 bits(20261202);
  // Latencies from 20 us to 50 ms, log-uniform, as a loaded server gives.
  std::uniform_real_distribution<double> log_ns(std::log(2e4), std::log(5e7));
  LatencyHistogram h;
  std::vector<std::uint64_t> values;
  for (int i = 0; i < 20000; ++i) {
    const auto v = static_cast<std::uint64_t>(std::exp(log_ns(bits)));
    values.push_back(v);
    h.Record(v);
  }
  EXPECT_EQ(h.count(), values.size());
  EXPECT_EQ(h.max_nanoseconds(), *std::max_element(values.begin(), values.end()));
  for (double q : {0.001, 0.5, 0.9, 0.99, 0.999, 1.0}) {
    const std::uint64_t exact = NearestRank(values, q);
    const std::uint64_t reported = h.Percentile(q);
    EXPECT_GE(reported, exact) << q;
    EXPECT_LE(static_cast<double>(reported), static_cast<double>(exact) * (1.0 + 1.0 / 128)) << q;
  }
  EXPECT_EQ(h.Percentile(1.0), h.max_nanoseconds());
}

TEST(LatencyHistogramTest, SmallValuesAreExact) {
  LatencyHistogram h;
  std::vector<std::uint64_t> values = {3, 1, 4, 1, 5, 9, 2, 6, 5, 3, 5};
  for (std::uint64_t v : values) h.Record(v);
  for (double q : {0.1, 0.25, 0.5, 0.75, 1.0}) EXPECT_EQ(h.Percentile(q), NearestRank(values, q));
  EXPECT_EQ(LatencyHistogram().Percentile(0.5), 0u);
}

TEST(LatencyHistogramTest, ConcurrentRecordsAreAllCounted) {
  LatencyHistogram h;
  std::vector<std::thread> threads;
  for (int t = 0; t < 4; ++t) {
    threads.emplace_back([&h, t] {
      for (int i = 0; i < 10000; ++i) h.Record(static_cast<std::uint64_t>(1000 * (t + 1) + i));
    });
  }
  for (std::thread& t : threads) t.join();
  EXPECT_EQ(h.count(), 40000u);
  EXPECT_EQ(h.max_nanoseconds(), 4000u + 9999u);
}

}  // namespace
}  // namespace riskbound::cli
