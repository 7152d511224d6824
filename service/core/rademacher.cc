#include "service/core/rademacher.h"

#include <algorithm>
#include <cmath>

#include "absl/strings/str_format.h"

namespace riskbound::core {

Certificate RademacherBound(const RademacherEvidence& evidence, double delta) {
  const double m = static_cast<double>(evidence.sample_count);
  const double rate = EmpiricalRate(evidence);
  const bool sampled = evidence.sigma_draw_count > 0;
  const double main_delta = sampled ? delta / 2.0 : delta;
  double complexity = evidence.empirical_rademacher;
  if (sampled) {
    const double draws = static_cast<double>(evidence.sigma_draw_count);
    const double slack_delta = delta / 2.0;
    complexity = std::max(0.0, complexity + std::sqrt(-2.0 * std::log(slack_delta) / (m * draws)));
  }
  // 3 sqrt(ln(2/delta') / (2m)), ln(2/delta') without forming 2/delta'.
  const double confidence =
      3.0 * std::sqrt((std::log(2.0) - std::log(main_delta)) / (2.0 * m));
  Certificate c = MakeCertificate(Family::kRademacher, delta, rate,
                                  rate + complexity + confidence, std::nullopt);
  if (sampled) {
    c.notes.push_back(absl::StrFormat(
        "Rademacher complexity estimated from %d sigma draws: delta split into %g for the "
        "bound and %g for the McDiarmid slack of the estimate",
        evidence.sigma_draw_count, main_delta, delta / 2.0));
  }
  return c;
}

namespace {

// The validity condition every relabel certificate states, and the mark of a
// heuristic one.
void MarkRelabel(const RelabelEvidence& evidence, Certificate* c) {
  if (evidence.training == RelabelTraining::kApproximate) {
    c->heuristic = true;
    c->notes.push_back(
        "HEURISTIC, NOT A BOUND: evidence.relabel.training is approximate; an approximate "
        "optimiser underestimates the supremum over the class, so this number can fall below "
        "the true error more often than delta allows. Use it to compare models, never as a "
        "guarantee: the promotion gate refuses it");
  } else {
    c->notes.push_back(
        "valid only because every retraining reached the minimum 0-1 training error over the "
        "whole class on its relabelled sample (evidence.relabel.training = exact, as stated by "
        "the caller)");
  }
}

}  // namespace

double RelabelEstimate(const RelabelEvidence& evidence) {
  const long double draws = static_cast<long double>(evidence.draws.size());
  const long double m = static_cast<long double>(evidence.sample_count);
  if (evidence.scheme == RelabelScheme::kHalfFlip) {
    // Exact: |f - k| <= 2^52 per draw, at most 10^5 draws.
    __int128 sum = 0;
    for (const RelabelDraw& d : evidence.draws) {
      sum += static_cast<__int128>(d.flipped_half_error_count) -
             static_cast<__int128>(d.kept_half_error_count);
    }
    return static_cast<double>(static_cast<long double>(sum) / (draws * (m / 2.0L)));
  }
  unsigned __int128 sum = 0;
  for (const RelabelDraw& d : evidence.draws) sum += d.relabelled_error_count;
  return static_cast<double>(1.0L - 2.0L * static_cast<long double>(sum) / (m * draws));
}

double RademacherDrawSlack(std::uint64_t sample_count, std::uint64_t draw_count, double delta) {
  return std::sqrt(-2.0 * std::log(delta) /
                   (static_cast<double>(sample_count) * static_cast<double>(draw_count)));
}

Certificate RademacherFromDraws(const RelabelEvidence& evidence, double delta) {
  RademacherEvidence r;
  r.error_count = evidence.error_count;
  r.sample_count = evidence.sample_count;
  r.empirical_rademacher = RelabelEstimate(evidence);
  r.sigma_draw_count = evidence.draws.size();
  Certificate c = RademacherBound(r, delta);
  const double slack = RademacherDrawSlack(r.sample_count, r.sigma_draw_count, delta / 2.0);
  c.notes.push_back(absl::StrFormat(
      "capacity measured on the data: %d random-sign retrainings give Rhat_N = %.6f; McDiarmid "
      "slack sqrt(2 ln(2/delta) / (m N)) = %.6f; Rhat_S(H) <= %.6f used in the bound",
      r.sigma_draw_count, r.empirical_rademacher, slack,
      std::max(0.0, r.empirical_rademacher + slack)));
  MarkRelabel(evidence, &c);
  return c;
}

// Why R(h) <= R_emp(h) + D_N + 3 sqrt(ln(1/delta)/(2m)) for every h, with
// probability >= 1 - delta (m even; halves A = flipped, B = kept of m/2
// examples each, fixed independently of the sample; L_A, L_B the error rates
// on them, Lhat = (L_A + L_B)/2 the training error, L the true error):
//  1. E sup_h (L - Lhat) <= E sup_h (L_A - L_B) = E D: sup(L - Lhat) <=
//     (sup(L - L_A) + sup(L - L_B))/2; L = E[L_A | B], so by Jensen
//     E sup(L - L_B) <= E sup(L_A - L_B), and (A, B) and (B, A) have the same
//     law, so E sup(L - L_A) <= E sup(L_B - L_A) = E D as well.
//  2. Given the halves, Z = sup_h (L - Lhat) - D_N changes by at most 1/m +
//     2/m = 3/m when one example changes (each D_j by at most 2/m).
//     McDiarmid (1989): P(Z >= E Z + t) <= exp(-2 t^2 / (m (3/m)^2)), so
//     t = 3 sqrt(ln(1/delta) / (2m)), and E Z <= 0 by step 1.
// This is a maximal-discrepancy bound in the sense of Bartlett, Boucheron &
// Lugosi (2002), whose first page defines the same discrepancy (first half
// against second half, computed by retraining with labels flipped); their
// theorem's number and constant could not be read, so this derivation stands
// on its own and is not a quotation of it (see rademacher.h).
Certificate MaximalDiscrepancyBound(const RelabelEvidence& evidence, double delta) {
  const double m = static_cast<double>(evidence.sample_count);
  const double rate = EmpiricalRate(evidence);
  const double discrepancy = RelabelEstimate(evidence);
  const double confidence = 3.0 * std::sqrt(-std::log(delta) / (2.0 * m));
  Certificate c = MakeCertificate(Family::kMaximalDiscrepancy, delta, rate,
                                  rate + discrepancy + confidence, std::nullopt);
  c.notes.push_back(absl::StrFormat(
      "capacity measured on the data: %d half-flip retrainings give the maximal discrepancy "
      "D_N = %.6f (mean of (flipped-half errors - kept-half errors) / (m/2)); confidence term "
      "3 sqrt(ln(1/delta) / (2m)) = %.6f",
      evidence.draws.size(), discrepancy, confidence));
  MarkRelabel(evidence, &c);
  return c;
}

}  // namespace riskbound::core
