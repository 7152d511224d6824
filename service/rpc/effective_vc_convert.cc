#include "service/rpc/effective_vc_convert.h"

#include <string>

#include "absl/strings/str_cat.h"
#include "service/rpc/enums.h"

namespace riskbound::rpc {

Converted<core::EffectiveVcRequest> FitEffectiveVcDimensionRequestFromProto(
    const v1::FitEffectiveVcDimensionRequest& in) {
  Converted<core::EffectiveVcRequest> out;
  core::EffectiveVcRequest& r = out.request;
  if (out.refusals.RefuseList("design_points", in.design_points_size(), core::kMaxDesignPoints)) {
    for (int i = 0; i < in.design_points_size(); ++i) {
      const v1::DeviationPoint& p = in.design_points(i);
      core::DeviationPoint c;
      c.half_sample_count = p.half_sample_count();
      if (out.refusals.RefuseList(absl::StrCat("design_points[", i, "].deviations"),
                                  p.deviations_size(), core::kMaxDeviationCount)) {
        c.deviations.assign(p.deviations().begin(), p.deviations().end());
      }
      r.design_points.push_back(std::move(c));
    }
  }
  r.training = RelabelTrainingFromProto(in.training());
  r.bootstrap_resample_count = in.bootstrap_resample_count();
  if (in.has_interval_level()) r.interval_level = in.interval_level();
  r.seed = in.seed();
  return out;
}

v1::FitEffectiveVcDimensionResponse FitEffectiveVcDimensionResponseToProto(
    const core::EffectiveVcFit& fit) {
  v1::FitEffectiveVcDimensionResponse out;
  out.set_effective_vc_dimension(fit.effective_vc_dimension);
  out.set_interval_lower(fit.interval_lower);
  out.set_interval_upper(fit.interval_upper);
  out.set_interval_level(fit.interval_level);
  out.set_bootstrap_resample_count(fit.bootstrap_resample_count);
  for (const core::DeviationFit& p : fit.points) {
    v1::DeviationFit* o = out.add_points();
    o->set_half_sample_count(p.half_sample_count);
    o->set_mean_deviation(p.mean_deviation);
    o->set_fitted_deviation(p.fitted_deviation);
    o->set_residual(p.residual);
  }
  out.set_rms_residual(fit.rms_residual);
  out.set_censored(fit.censored);
  out.set_poor_fit(fit.poor_fit);
  out.set_few_informative_points(fit.few_informative_points);
  out.set_approximate_training(fit.approximate_training);
  for (const std::string& n : fit.notes) out.add_notes(n);
  out.set_engine_version(RISKBOUND_ENGINE_VERSION);
  return out;
}

}  // namespace riskbound::rpc
