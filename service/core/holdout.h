// Hold-out (test-set) bound families for the 0-1 loss.
//
// Setting: the classifier was fixed before the n hold-out examples were drawn
// and makes k errors on them. Each function returns a certificate whose upper
// bound holds with probability >= 1 - delta, and a one-sided lower bound at
// the same delta. Pure functions; thread-safe.
#ifndef RISKBOUND_SERVICE_CORE_HOLDOUT_H_
#define RISKBOUND_SERVICE_CORE_HOLDOUT_H_

#include "service/core/evidence.h"

namespace riskbound::core {

// HoldoutExactBinomial
// One-sided Clopper-Pearson limits (exact binomial tail inversion).
// Source: Clopper & Pearson (1934); Langford (2005) test-set bound.
// REQUIRES: counts.sample_count >= 1, counts.error_count <= counts.sample_count,
//           0 < delta < 1.
Certificate HoldoutExactBinomial(const SampleCounts& counts, double delta);

// HoldoutHoeffding
// k/n +- sqrt(ln(1/delta) / (2n)). Source: Hoeffding (1963), Theorem 1.
// REQUIRES: as HoldoutExactBinomial.
Certificate HoldoutHoeffding(const SampleCounts& counts, double delta);

// HoldoutKlChernoff
// kl^{-1}(k/n, ln(1/delta)/n), upper and lower inverses.
// Source: Chernoff (1952); Langford (2005).
// REQUIRES: as HoldoutExactBinomial.
Certificate HoldoutKlChernoff(const SampleCounts& counts, double delta);

}  // namespace riskbound::core

#endif  // RISKBOUND_SERVICE_CORE_HOLDOUT_H_
