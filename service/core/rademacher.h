// Rademacher-complexity bound family (binary classification, 0-1 loss).
//
// Holds uniformly over the hypothesis class, so it is valid for a model
// chosen on the same sample. Convention: Mohri,
// Rostamizadeh & Talwalkar, Rhat_S(H) = E_sigma sup_h (1/m) sum sigma_i
// h(x_i) for the {-1, +1}-valued hypothesis class, no absolute value, no
// factor 2. A complexity in Bartlett & Mendelson's convention is at least
// twice as large and must not be passed here. Pure; thread-safe.
#ifndef RISKBOUND_SERVICE_CORE_RADEMACHER_H_
#define RISKBOUND_SERVICE_CORE_RADEMACHER_H_

#include "service/core/evidence.h"

namespace riskbound::core {

// RademacherBound
// sigma_draw_count = 0 (exact expectation over sigma):
//   R <= R_emp + Rhat_S(H) + 3 sqrt(ln(2/delta) / (2m)).
// sigma_draw_count = N > 0 (Monte-Carlo average over N sigma vectors): delta
// is split in halves; the bound above at delta/2, with Rhat replaced by
//   max(0, Rhat_N + sqrt(2 ln(2/delta) / (m N)))
// (McDiarmid: each sigma_ij moves the average by at most 2/(mN); the slack
// is at delta' = delta/2; the exact Rhat_S(H) is never negative). A note
// records the split. Upper bound only.
// Source: Mohri, Rostamizadeh & Talwalkar (2018), Theorem 3.5; McDiarmid
// (1989) for the slack.
// REQUIRES: evidence valid per ValidateEvidence (samples >= 1, errors <=
//           samples, empirical_rademacher finite in [0, 1], or [-1, 1] for
//           N > 0), 0 < delta < 1. The supremum inside Rhat must be exact
//           (an approximate optimizer underestimates it and voids the bound).
Certificate RademacherBound(const RademacherEvidence& evidence, double delta);

}  // namespace riskbound::core

#endif  // RISKBOUND_SERVICE_CORE_RADEMACHER_H_
