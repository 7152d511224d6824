// Training-set bound families for a class of finite VC dimension.
//
// Both bounds hold uniformly over the class, so they are valid for a model
// chosen from the same data (e.g. by empirical risk minimization). They are
// usually vacuous for modern models; report them, gate on hold-out bounds.
// Pure functions; thread-safe.
#ifndef RISKBOUND_SERVICE_CORE_VC_H_
#define RISKBOUND_SERVICE_CORE_VC_H_

#include <cstdint>

#include "service/core/evidence.h"

namespace riskbound::core {

// VcLogGrowthBound
// Returns an upper bound on ln Pi(2m), the log growth function at 2m points:
// min(h (ln(2m/h) + 1), 2m ln 2) (Sauer-Shelah, and the trivial 2^{2m}).
// h = 0 returns 0.
// REQUIRES: m >= 1.
double VcLogGrowthBound(double h, double m);

// VcConfidence
// Vapnik's VC confidence sqrt((ln Pi(2m) - ln(delta/4)) / m), with
// VcLogGrowthBound standing in for ln Pi(2m). Not clipped.
// Source: Vapnik (1995) ch. 3; Burges (1998) eq. (3).
// REQUIRES: m >= 1, 0 < delta < 1.
double VcConfidence(double h, double m, double delta);

// VcAdditive
// R <= R_emp + VcConfidence + 1/m (the 1/m keeps the conservative form of
// the deviation inequality). Lower bound R_emp - VcConfidence - 1/m holds on
// the same event.
// REQUIRES: counts.sample_count >= 1, counts.error_count <= counts.sample_count,
//           0 < delta < 1.
Certificate VcAdditive(const SampleCounts& counts, std::uint64_t vc_dimension,
                       double delta);

// VcRelative
// Relative-deviation form: with E = 4 (ln Pi(2m) - ln(delta/4)) / m,
// R <= R_emp + (E/2)(1 + sqrt(1 + 4 R_emp / E)). Upper bound only.
// Source: Vapnik (1998) ch. 4; Anthony & Shawe-Taylor (1993).
// REQUIRES: as VcAdditive.
Certificate VcRelative(const SampleCounts& counts, std::uint64_t vc_dimension,
                       double delta);

// VcAdditiveAtReal, VcRelativeAtReal
// The same two formulas with a real h >= 0 in place of the integer VC
// dimension (VcAdditive(c, h, d) equals VcAdditiveAtReal(c, double(h), d)).
// Only select's heuristic mode calls them, with a fitted effective VC
// dimension: the result is then a penalized score, not a bound, and the
// caller marks it so (a real h is a bound's capacity only when it is the
// class's VC dimension).
// REQUIRES: as VcAdditive; h finite and >= 0.
Certificate VcAdditiveAtReal(const SampleCounts& counts, double h, double delta);
Certificate VcRelativeAtReal(const SampleCounts& counts, double h, double delta);

}  // namespace riskbound::core

#endif  // RISKBOUND_SERVICE_CORE_VC_H_
