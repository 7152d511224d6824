#include "service/core/pac_bayes.h"

#include <algorithm>
#include <cmath>
#include <limits>
#include <optional>

#include "absl/strings/str_format.h"
#include "service/core/delta_split.h"
#include "service/core/numeric.h"

namespace riskbound::core {
namespace {

// Turns a Gibbs upper bound into the certificate of the requested target.
// For the majority vote the bound doubles (R(MV_Q) <= 2 R(Q)) and no lower
// bound is given.
Certificate Finish(Family family, const PacBayesEvidence& e, double delta,
                   double gibbs_upper, std::optional<double> gibbs_lower) {
  const double risk = e.gibbs_empirical_risk;
  if (e.target == PacBayesTarget::kMajorityVote) {
    const double mv_upper = std::isnan(gibbs_upper) ? 1.0 : std::min(1.0, 2.0 * gibbs_upper);
    Certificate c = MakeCertificate(family, delta, risk, mv_upper, std::nullopt);
    c.notes.emplace_back(
        "bounds the Q-weighted majority vote via R(MV) <= 2 R(Gibbs); empirical_risk is "
        "the Gibbs classifier's empirical risk");
    return c;
  }
  Certificate c = MakeCertificate(family, delta, risk, gibbs_upper, gibbs_lower);
  c.notes.emplace_back(
      "bounds the Gibbs (randomized) classifier that draws h ~ Q for every prediction, "
      "not a single deterministic model");
  return c;
}

}  // namespace

Certificate PacBayesMcAllester(const PacBayesEvidence& evidence, double delta) {
  const double m = static_cast<double>(evidence.sample_count);
  const double numerator = evidence.kl_divergence - std::log(delta) + std::log(m) + 2.0;
  const double upper =
      evidence.gibbs_empirical_risk + std::sqrt(numerator / (2.0 * m - 1.0));
  return Finish(Family::kPacBayesMcAllester, evidence, delta, upper, std::nullopt);
}

Certificate PacBayesKl(const PacBayesEvidence& evidence, double delta) {
  const double m = static_cast<double>(evidence.sample_count);
  const bool small = evidence.sample_count < 8;
  // ln(2 sqrt(m)/delta) (Maurer, m >= 8) or ln((m + 1)/delta) (Seeger).
  const double log_term = small ? std::log(m + 1.0) - std::log(delta)
                                : std::log(2.0) + 0.5 * std::log(m) - std::log(delta);
  const double budget = (evidence.kl_divergence + log_term) / m;
  const double q = evidence.gibbs_empirical_risk;
  Certificate c = Finish(Family::kPacBayesKl, evidence, delta, KlInverseUpper(q, budget),
                         KlInverseLower(q, budget));
  if (small) {
    c.notes.emplace_back(
        "fewer than 8 samples: Seeger's ln((m+1)/delta) term is used in place of "
        "Maurer's ln(2 sqrt(m)/delta), which needs m >= 8");
  }
  return c;
}

double PacBayesCatoniAt(double gibbs_empirical_risk, double kl_divergence,
                        std::uint64_t samples, double c, double delta) {
  const double m = static_cast<double>(samples);
  const double exponent = -c * gibbs_empirical_risk - (kl_divergence - std::log(delta)) / m;
  return -std::expm1(exponent) / -std::expm1(-c);
}

Certificate PacBayesCatoni(const PacBayesEvidence& evidence, double delta) {
  // Each grid point's share rounded down (delta_split.h): the union over the
  // grid never spends more than delta.
  const double share = EqualShare(delta, kCatoniGrid.size());
  double best = std::numeric_limits<double>::infinity();
  double best_c = kCatoniGrid[0];
  for (double c : kCatoniGrid) {
    const double v = PacBayesCatoniAt(evidence.gibbs_empirical_risk, evidence.kl_divergence,
                                      evidence.sample_count, c, share);
    if (v < best) {
      best = v;
      best_c = c;
    }
  }
  Certificate cert = Finish(Family::kPacBayesCatoni, evidence, delta, best, std::nullopt);
  cert.notes.push_back(absl::StrFormat(
      "minimum over the fixed grid C in {0.125, 0.25, 0.5, 1, 2, 4, 8, 16, 32}, each at "
      "delta/9 = %g; attained at C = %g",
      share, best_c));
  return cert;
}

}  // namespace riskbound::core
