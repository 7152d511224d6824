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
  double log_level = std::log(delta) - LogChoose(static_cast<double>(m), static_cast<double>(d));
  if (!evidence.size_fixed_in_advance) log_level -= std::log(static_cast<double>(m));
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
        "the exact inversion could not be settled to double precision at these counts; "
        "a conservative upper limit (never smaller than the exact one, never larger "
        "than the kl-Chernoff limit) is reported");
  }
  return c;
}

}  // namespace riskbound::core
