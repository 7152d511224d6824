#include "service/core/compression.h"

#include <algorithm>
#include <cmath>

#include "service/core/numeric.h"

namespace riskbound::core {

Certificate SampleCompression(const CompressionEvidence& evidence, double delta) {
  const std::uint64_t m = evidence.sample_count;
  const std::uint64_t d = evidence.compression_size;
  const std::uint64_t k = evidence.outside_error_count;
  if (d >= m) {
    Certificate c = MakeCertificate(Family::kSampleCompression, delta, 0.0, 1.0, std::nullopt);
    c.notes.emplace_back(
        "the compression set holds every training example: no example is left to "
        "test the reconstructed model on, so the bound is trivial");
    return c;
  }
  const std::uint64_t outside = m - d;
  const double rate = static_cast<double>(k) / static_cast<double>(outside);
  // ln(delta / (m C(m, d))), or ln(delta / C(m, d)) when d was fixed in advance.
  const double log_choose = LogChoose(static_cast<double>(m), static_cast<double>(d));
  const double log_m = evidence.size_fixed_in_advance ? 0.0 : std::log(static_cast<double>(m));
  double log_level = std::log(delta) - log_choose - log_m;
  // Rounded down by more than its own rounding (LogChoose is good to ~1e-14
  // of its size, each logarithm to an ulp), so the level used is never above
  // the exact one and the limit stays on the conservative side.
  log_level -= 1e-14 * log_choose + 1e-15 * (std::fabs(std::log(delta)) + log_m) + 1e-300;
  const TailLimit limit = BinomialUpperLimitLogDelta(outside, k, log_level);
  Certificate c =
      MakeCertificate(Family::kSampleCompression, delta, rate, limit.value, std::nullopt);
  c.exact = limit.exact;
  c.notes.emplace_back(
      evidence.size_fixed_in_advance
          ? "binomial tail inversion on the examples outside the compression set at "
            "delta / C(m, d) (size fixed in advance)"
          : "binomial tail inversion on the examples outside the compression set at "
            "delta / (m C(m, d)) (union bound over sizes and subsets)");
  if (!limit.exact) {
    c.notes.emplace_back(
        "the binomial tail at the exact limit could not be confirmed in double precision "
        "at these counts; the kl-Chernoff limit (valid, slightly looser) is reported in "
        "its place");
  }
  return c;
}

}  // namespace riskbound::core
