// Hold-out bound families for a bounded (not 0-1) loss.
//
// Setting: the model was fixed before the n hold-out examples were drawn; its
// per-example losses lie in [loss_min, loss_max], a range fixed in advance.
// Each function rescales the losses to [0, 1] by z = (x - a) / (b - a),
// bounds E[z], and maps the limits back rounding outward (every step of the
// arithmetic rounded away from the mean, delta_split.h), so a large offset
// never rounds a limit onto the mean: with n finite the penalty is never 0
// unless the mean is loss_max (the smallest double above the limit may then
// be loss_max itself: the certificate is vacuous). The certificate's bounds,
// empirical value and penalty are in the loss's own units, clipped to
// [loss_min, loss_max] (Certificate::bounded_loss_units is true). The
// certificate is vacuous iff its upper bound reaches loss_max. Each also
// carries a one-sided lower bound at the same delta (the same inequality
// applied to 1 - z); upper and lower together hold with probability
// >= 1 - 2 delta. Pure functions; thread-safe.
#ifndef RISKBOUND_SERVICE_CORE_BOUNDED_LOSS_H_
#define RISKBOUND_SERVICE_CORE_BOUNDED_LOSS_H_

#include "service/core/evidence.h"

namespace riskbound::core {

// BoundedHoeffding
// E[X] <= Xbar + (b - a) sqrt(ln(1/delta) / (2n)).
// Source: Hoeffding (1963), Theorem 2 (bounded variables).
// REQUIRES: evidence valid per ValidateEvidence (samples >= 1,
//           loss_min < loss_max, mean in range), 0 < delta < 1.
Certificate BoundedHoeffding(const BoundedLossEvidence& evidence, double delta);

// BoundedKl
// E[z] <= kl^{-1}_+(zbar, ln(1/delta) / n) on the rescaled loss. Valid for
// any loss in [0, 1]: a [0, 1] variable with mean mu has a moment-generating
// function no larger than Bernoulli(mu)'s, so the Chernoff-kl tail holds.
// Source: Hoeffding (1963), proof of Theorem 1 (the moment-generating-function
// comparison with a Bernoulli variable).
// REQUIRES: as BoundedHoeffding.
Certificate BoundedKl(const BoundedLossEvidence& evidence, double delta);

// BoundedEmpiricalBernstein
// E[z] <= zbar + sqrt(2 V ln(2/delta) / n) + 7 ln(2/delta) / (3 (n - 1)),
// V the unbiased sample variance of z = sample_variance / (b - a)^2.
// Source: Maurer & Pontil (2009), Theorem 4.
// REQUIRES: as BoundedHoeffding and samples >= 2 (the registry's applies()
//           and ValidateEvidence's family check enforce it; called with
//           samples = 1 it returns the trivial certificate [loss_min,
//           loss_max] with a note rather than dividing by zero).
Certificate BoundedEmpiricalBernstein(const BoundedLossEvidence& evidence, double delta);

}  // namespace riskbound::core

#endif  // RISKBOUND_SERVICE_CORE_BOUNDED_LOSS_H_
