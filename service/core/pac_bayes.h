// PAC-Bayes bound families.
//
// Setting: a prior P over the hypotheses, fixed before the m training
// examples were seen (it may be fit on other data); any posterior Q. With
// probability >= 1 - delta the bounds hold simultaneously for every Q, on the
// risk of the Gibbs classifier (a fresh h ~ Q per prediction), for losses in
// [0, 1]. For PacBayesTarget::kMajorityVote the certificate bounds the
// Q-weighted majority vote by R(MV_Q) <= 2 R(Q) (the majority vote errs
// only where at least half of Q errs; Langford & Shawe-Taylor 2003, from
// memory), clipped
// to 1; empirical_risk stays the Gibbs
// empirical risk and a note says which classifier is bounded. Only
// PacBayesKl for the Gibbs target carries a lower bound (the kl inequality is
// two-sided); the majority vote has none. Pure functions; thread-safe.
#ifndef RISKBOUND_SERVICE_CORE_PAC_BAYES_H_
#define RISKBOUND_SERVICE_CORE_PAC_BAYES_H_

#include <array>
#include <cstdint>

#include "service/core/evidence.h"

namespace riskbound::core {

// The grid of Catoni constants C used by PacBayesCatoni, fixed in advance
// (never chosen from the data): C = 2^j for j = -3..5, i.e. 0.125, 0.25, 0.5,
// 1, 2, 4, 8, 16, 32. Each is computed at delta / 9 and the minimum is
// reported (a union bound over the grid, Catoni 2007). Small C
// suits large empirical risk, large C the near-realizable case.
inline constexpr std::array<double, 9> kCatoniGrid = {0.125, 0.25, 0.5, 1.0, 2.0,
                                                      4.0,   8.0,  16.0, 32.0};

// PacBayesMcAllester
// R(Q) <= R_emp(Q) + sqrt((KL + ln(1/delta) + ln m + 2) / (2m - 1)).
// Source: McAllester (2003), Machine Learning 51:5-21, Theorem 1 (the
// theorem number from memory).
// REQUIRES: evidence valid per ValidateEvidence (samples >= 1, KL finite
//           >= 0, gibbs_empirical_risk in [0, 1]), 0 < delta < 1.
Certificate PacBayesMcAllester(const PacBayesEvidence& evidence, double delta);

// PacBayesKl
// R(Q) <= kl^{-1}_+(R_emp(Q), (KL + ln(2 sqrt(m) / delta)) / m) for m >= 8
// (Maurer 2004). For m < 8 it uses Seeger's ln((m + 1) / delta) in place of
// ln(2 sqrt(m) / delta) and says so in a note.
// Source: Seeger (2002), JMLR 3; Maurer (2004), "A note on the PAC Bayesian
// theorem".
// REQUIRES: as PacBayesMcAllester.
Certificate PacBayesKl(const PacBayesEvidence& evidence, double delta);

// PacBayesCatoniAt
// Catoni's bound for one constant C fixed in advance, not clipped:
// (1 - exp(-C R_emp(Q) - (KL + ln(1/delta)) / m)) / (1 - exp(-C)).
// Source: Catoni (2007), Theorem 1.2.6.
// REQUIRES: C > 0, finite; others as PacBayesMcAllester.
double PacBayesCatoniAt(double gibbs_empirical_risk, double kl_divergence,
                        std::uint64_t samples, double c, double delta);

// PacBayesCatoni
// The minimum of PacBayesCatoniAt over kCatoniGrid, each at delta / 9; a note
// names the grid and the C that attained the minimum.
// Source: Catoni (2007), Theorem 1.2.6, with a union bound over the grid.
// REQUIRES: as PacBayesMcAllester.
Certificate PacBayesCatoni(const PacBayesEvidence& evidence, double delta);

}  // namespace riskbound::core

#endif  // RISKBOUND_SERVICE_CORE_PAC_BAYES_H_
