// Sample-compression bound family.
//
// Setting: a compression function picks d of the m training examples; a
// reconstruction function fixed before the data were seen rebuilds the model
// from them alone (e.g. an SVM retrained on its support vectors). k = errors
// of that model on the m - d examples outside the compression set. Holds
// simultaneously for every compression set. Pure; thread-safe.
#ifndef RISKBOUND_SERVICE_CORE_COMPRESSION_H_
#define RISKBOUND_SERVICE_CORE_COMPRESSION_H_

#include <cstdint>

#include "service/core/evidence.h"

namespace riskbound::core {

// SampleCompression
// R <= Binbar(m - d, k, delta / (m C(m, d))), the exact binomial tail
// inversion on the examples outside the compression set, at the level of a
// union bound over sizes d (weight 1/m) and subsets (C(m, d)); the factor m is
// dropped when size_fixed_in_advance. Inverted in log space (the level
// underflows a double). d = m leaves no examples to test on: the certificate
// is vacuous (upper 1) with a note. empirical_risk = k / (m - d) (0 when
// d = m). Upper bound only. The level is rounded down by more than its own
// rounding, and the inversion (numeric.h BinomialUpperLimitLogDelta) is
// post-checked on the tail, so the limit is never below the exact one
// (checked against mpmath up to m = 2^53: tests/reference/tail_limits_test.py).
// Source: Langford (2005), sample compression bound; Littlestone & Warmuth
// (1986); Floyd & Warmuth (1995): the union bound over the C(m, d) possible
// compression sets (and over d when it was not fixed in advance).
// REQUIRES: evidence valid per ValidateEvidence (1 <= m, d <= m,
//           k <= m - d), 0 < delta < 1.
Certificate SampleCompression(const CompressionEvidence& evidence, double delta);

}  // namespace riskbound::core

#endif  // RISKBOUND_SERVICE_CORE_COMPRESSION_H_
