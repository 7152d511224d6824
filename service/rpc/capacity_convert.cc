#include "service/rpc/capacity_convert.h"

#include <cstdint>

#include "service/core/limits.h"
#include "service/rpc/enums.h"

namespace riskbound::rpc {
namespace {

constexpr double kTwoTo64 = 18446744073709551616.0;

}  // namespace

core::ModelDescription ModelDescriptionFromProto(const v1::ModelDescription& in,
                                                 const std::string& model_path,
                                                 Refusals* refusals) {
  core::ModelDescription out;
  out.kind = ModelKindFromProto(in.kind());
  // Sizes first: an oversized list is refused and no entry is copied.
  if (refusals->RefuseList(model_path + ".layer_widths",
                           static_cast<std::size_t>(in.layer_widths_size()), core::kMaxLayerWidths,
                           model_path)) {
    out.layer_widths.assign(in.layer_widths().begin(), in.layer_widths().end());
  }
  if (in.has_dimension()) out.dimension = in.dimension();
  if (in.has_with_bias()) out.with_bias = in.with_bias();
  if (in.has_degree()) out.degree = in.degree();
  if (in.has_radius()) out.radius = in.radius();
  if (in.has_margin()) out.margin = in.margin();
  if (in.has_interval_count()) out.interval_count = in.interval_count();
  if (in.has_feature_count()) out.feature_count = in.feature_count();
  if (in.has_leaf_count()) out.leaf_count = in.leaf_count();
  if (in.has_member_count()) out.member_count = in.member_count();
  if (in.has_member_vc_dimension()) out.member_vc_dimension = in.member_vc_dimension();
  if (in.has_weight_count()) out.weight_count = in.weight_count();
  if (in.has_unit_count()) out.unit_count = in.unit_count();
  if (in.has_layer_count()) out.layer_count = in.layer_count();
  if (in.has_hypothesis_count()) out.hypothesis_count = in.hypothesis_count();
  if (in.has_description_bits()) out.description_bits = in.description_bits();
  return out;
}

void ModelDescriptionToProto(const core::ModelDescription& in, v1::ModelDescription* out) {
  out->Clear();
  if (in.kind.has_value()) out->set_kind(ModelKindToProto(*in.kind));
  if (in.dimension) out->set_dimension(*in.dimension);
  if (in.with_bias) out->set_with_bias(*in.with_bias);
  if (in.degree) out->set_degree(*in.degree);
  if (in.radius) out->set_radius(*in.radius);
  if (in.margin) out->set_margin(*in.margin);
  if (in.interval_count) out->set_interval_count(*in.interval_count);
  if (in.feature_count) out->set_feature_count(*in.feature_count);
  if (in.leaf_count) out->set_leaf_count(*in.leaf_count);
  if (in.member_count) out->set_member_count(*in.member_count);
  if (in.member_vc_dimension) out->set_member_vc_dimension(*in.member_vc_dimension);
  if (in.weight_count) out->set_weight_count(*in.weight_count);
  if (in.unit_count) out->set_unit_count(*in.unit_count);
  if (in.layer_count) out->set_layer_count(*in.layer_count);
  for (std::uint64_t w : in.layer_widths) out->add_layer_widths(w);
  if (in.hypothesis_count) out->set_hypothesis_count(*in.hypothesis_count);
  if (in.description_bits) out->set_description_bits(*in.description_bits);
}

void CapacityEstimateToProto(const core::CapacityEstimate& in, v1::CapacityEstimate* out) {
  out->Clear();
  out->set_vc_dimension(in.vc_dimension);
  if (in.status != core::CapacityStatus::kInfinite && !in.exceeds_uint64 &&
      in.vc_dimension < kTwoTo64) {
    out->set_vc_dimension_uint64(static_cast<std::uint64_t>(in.vc_dimension));
  }
  out->set_status(CapacityStatusToProto(in.status));
  if (in.vc_dimension_lower_bound.has_value()) {
    out->set_vc_dimension_lower_bound(*in.vc_dimension_lower_bound);
  }
  out->set_exceeds_uint64(in.exceeds_uint64);
  out->set_source(in.source);
  out->set_formula(in.formula);
  for (const std::string& note : in.notes) out->add_notes(note);
  if (in.log_hypothesis_count.has_value()) {
    out->set_log_hypothesis_count(*in.log_hypothesis_count);
  }
}

Converted<core::ModelDescription> EstimateCapacityRequestFromProto(
    const v1::EstimateCapacityRequest& in) {
  Converted<core::ModelDescription> out;
  out.request = ModelDescriptionFromProto(in.model(), "model", &out.refusals);
  return out;
}

v1::EstimateCapacityResponse EstimateCapacityResponseToProto(
    const core::CapacityEstimate& estimate) {
  v1::EstimateCapacityResponse out;
  CapacityEstimateToProto(estimate, out.mutable_estimate());
  out.set_engine_version(RISKBOUND_ENGINE_VERSION);
  return out;
}

}  // namespace riskbound::rpc
