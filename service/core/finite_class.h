// Training-set bound families for a finite class fixed before the sample was
// seen (Occam's razor). Hold uniformly over the class. Pure; thread-safe.
#ifndef RISKBOUND_SERVICE_CORE_FINITE_CLASS_H_
#define RISKBOUND_SERVICE_CORE_FINITE_CLASS_H_

#include "service/core/evidence.h"

namespace riskbound::core {

// OccamHoeffding
// R <= R_emp + sqrt((ln|H| + ln(1/delta)) / (2m)); the lower bound
// R_emp - sqrt(...) is a separate one-sided statement at the same delta.
// Source: Hoeffding (1963) with a union bound; Blumer et al. (1987).
// REQUIRES: counts.sample_count >= 1, counts.error_count <= counts.sample_count,
//           log_hypothesis_count >= 0, 0 < delta < 1.
Certificate OccamHoeffding(const SampleCounts& counts, double log_hypothesis_count,
                           double delta);

// OccamKl
// R <= kl^{-1}_+(R_emp, (ln|H| + ln(1/delta)) / m), and the lower inverse.
// Source: Langford (2005), Occam's razor bound, kl form.
// REQUIRES: as OccamHoeffding.
Certificate OccamKl(const SampleCounts& counts, double log_hypothesis_count,
                    double delta);

}  // namespace riskbound::core

#endif  // RISKBOUND_SERVICE_CORE_FINITE_CLASS_H_
