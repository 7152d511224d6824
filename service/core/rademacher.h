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

#include <cstdint>

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

// RelabelEstimate
// The capacity a relabel-and-retrain experiment measured, from its raw draws,
// in exact integer sums (one rounding at the end):
//  * random signs: Rhat_N = 1 - 2 (sum_j e_j) / (m N), e_j the j-th
//    relabelled_error_count. With exact training, 1 - 2 e_j / m =
//    sup_h (1/m) sum_i sigma_ij y_i h(x_i), and sigma_ij y_i are fair
//    independent signs, so E Rhat_N = Rhat_S(H) in the Mohri et al.
//    convention (2018, Definition 3.1).
//  * half flip: D_N = (1/N) sum_j (f_j - k_j) / (m/2), f_j and k_j the
//    flipped and kept half error counts. With exact training the retrained
//    model maximises L_flipped(h) - L_kept(h) (its error on the relabelled
//    sample is 1/2 - (L_flipped - L_kept)/2), so each term is the maximal
//    discrepancy of Bartlett, Boucheron & Lugosi (2002).
// Returns a value in [-1, 1].
// REQUIRES: evidence valid per ValidateEvidence (scheme set, at least one
//           draw, counts within their halves). Pure; thread-safe.
double RelabelEstimate(const RelabelEvidence& evidence);

// RademacherDrawSlack
// sqrt(2 ln(1/delta) / (m N)): with probability >= 1 - delta over the N
// independent sign vectors, Rhat_S(H) <= Rhat_N + slack (McDiarmid 1989, one
// sided: each of the m N signs moves Rhat_N by at most 2/(m N), so
// exp(-2 t^2 / (m N (2/(m N))^2)) = exp(-m N t^2 / 2) = delta).
// REQUIRES: m >= 1, N >= 1, 0 < delta < 1.
double RademacherDrawSlack(std::uint64_t sample_count, std::uint64_t draw_count, double delta);

// RademacherFromDraws
// The rademacher family on relabel evidence with scheme kRandomSigns: the
// RademacherBound above with Rhat_N = RelabelEstimate(evidence) and
// sigma_draw_count = N (delta split in halves, McDiarmid slack at delta/2),
// with notes giving the estimate, the slack and the validity condition.
// Heuristic (Certificate::heuristic) when training is kApproximate.
// REQUIRES: evidence valid, scheme kRandomSigns, 0 < delta < 1.
Certificate RademacherFromDraws(const RelabelEvidence& evidence, double delta);

// MaximalDiscrepancyBound
// With probability >= 1 - delta, for every h of the class:
//   R(h) <= R_emp(h) + D_N + 3 sqrt(ln(1/delta) / (2m)),
// D_N = RelabelEstimate(evidence) (scheme kHalfFlip). Upper bound only.
// Source: the maximal discrepancy of Bartlett, Boucheron & Lugosi (2002),
// "Model Selection and Error Estimation", Machine Learning 48:85-113. Only
// the paper's first page could be read (abstract and introduction): it
// defines the quantity as we do ("the maximal difference between the error
// on the first half of the training data and the second half", computed by
// "empirical risk minimization over the training data with some labels
// flipped") but the theorem that bounds the error with it, its number and
// its constant were not available, so none is quoted. The constant used is
// the one derived in full in rademacher.cc and docs/capacity-from-data.md
// (symmetrization, then McDiarmid 1989 with bounded differences 3/m), valid
// for the average of N draws whose halves were fixed independently of the
// data. Nothing here is taken from memory of their theorem.
// Heuristic when training is kApproximate.
// REQUIRES: evidence valid (sample_count even), scheme kHalfFlip,
//           0 < delta < 1.
Certificate MaximalDiscrepancyBound(const RelabelEvidence& evidence, double delta);

}  // namespace riskbound::core

#endif  // RISKBOUND_SERVICE_CORE_RADEMACHER_H_
