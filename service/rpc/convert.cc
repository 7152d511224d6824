#include "service/rpc/convert.h"

#include <string>
#include <vector>

#include "service/core/families.h"
#include "service/core/limits.h"
#include "service/rpc/capacity_convert.h"
#include "service/rpc/enums.h"

namespace riskbound::rpc {

void CapacityFromProto(const v1::Capacity& in, const std::string& path, core::ClassCapacity* out,
                       Refusals* refusals) {
  switch (in.measure_case()) {
    case v1::Capacity::kVcDimension:
      out->vc_dimension = in.vc_dimension();
      break;
    case v1::Capacity::kHypothesisCount:
      out->hypothesis_count = in.hypothesis_count();
      break;
    case v1::Capacity::kLogHypothesisCount:
      out->log_hypothesis_count = in.log_hypothesis_count();
      break;
    case v1::Capacity::kModel:
      out->model = ModelDescriptionFromProto(in.model(), path + ".model", refusals);
      break;
    case v1::Capacity::MEASURE_NOT_SET:
      break;  // the core names the missing capacity
  }
}

void EvidenceFromProto(const v1::Evidence& e, const std::string& prefix, core::Evidence* out,
                       Refusals* refusals) {
  if (e.has_holdout()) {
    out->holdout = core::SampleCounts{e.holdout().error_count(), e.holdout().sample_count()};
  }
  if (e.has_training()) {
    core::TrainingEvidence t;
    t.error_count = e.training().error_count();
    t.sample_count = e.training().sample_count();
    CapacityFromProto(e.training().capacity(), prefix + ".training.capacity", &t.capacity,
                      refusals);
    out->training = std::move(t);
  }
  if (e.has_baseline_error_rate()) out->baseline_error_rate = e.baseline_error_rate();
  if (e.has_bounded_loss()) {
    const v1::BoundedLossEvidence& b = e.bounded_loss();
    core::BoundedLossEvidence c;
    c.mean_loss = b.mean_loss();
    c.sample_variance = b.sample_variance();
    c.sample_count = b.sample_count();
    // Unset: the core's default range.
    if (b.has_loss_min()) c.loss_min = b.loss_min();
    if (b.has_loss_max()) c.loss_max = b.loss_max();
    out->bounded_loss = c;
  }
  if (e.has_pac_bayes()) {
    const v1::PacBayesEvidence& p = e.pac_bayes();
    core::PacBayesEvidence c;
    c.kl_divergence = p.kl_divergence();
    c.gibbs_empirical_risk = p.gibbs_empirical_risk();
    c.sample_count = p.sample_count();
    c.target = PacBayesTargetFromProto(p.target());
    out->pac_bayes = c;
  }
  if (e.has_rademacher()) {
    const v1::RademacherEvidence& r = e.rademacher();
    core::RademacherEvidence c;
    c.error_count = r.error_count();
    c.sample_count = r.sample_count();
    c.empirical_rademacher = r.empirical_rademacher();
    c.sigma_draw_count = r.sigma_draw_count();
    out->rademacher = c;
  }
  if (e.has_compression()) {
    const v1::CompressionEvidence& k = e.compression();
    core::CompressionEvidence c;
    c.sample_count = k.sample_count();
    c.compression_size = k.compression_size();
    c.outside_error_count = k.outside_error_count();
    c.size_fixed_in_advance = k.size_fixed_in_advance();
    out->compression = c;
  }
  if (e.has_relabel()) {
    const v1::RelabelEvidence& r = e.relabel();
    core::RelabelEvidence c;
    c.error_count = r.error_count();
    c.sample_count = r.sample_count();
    c.scheme = RelabelSchemeFromProto(r.scheme());
    c.training = RelabelTrainingFromProto(r.training());
    // An oversized list is refused whole; the core names an empty one.
    if (refusals->RefuseList(prefix + ".relabel.draws", r.draws_size(),
                             core::kMaxRelabelDrawCount)) {
      c.draws.reserve(r.draws_size());
      for (const v1::RelabelDraw& d : r.draws()) {
        c.draws.push_back(
            {d.relabelled_error_count(), d.flipped_half_error_count(), d.kept_half_error_count()});
      }
    }
    out->relabel = std::move(c);
  }
  // An oversized list is refused whole, before any entry is copied.
  if (refusals->RefuseList(prefix + ".slices", e.slices_size(), core::kMaxSlices)) {
    out->slices.reserve(e.slices_size());
    for (const v1::SliceEvidence& s : e.slices()) {
      core::SliceEvidence c;
      c.name = s.name();
      c.error_count = s.error_count();
      c.sample_count = s.sample_count();
      out->slices.push_back(std::move(c));
    }
  } else {
    // The slices were evidence: "no evidence" would be wrong.
    refusals->skipped_exact.push_back(prefix);
  }
}

void SliceSharingFromProto(const v1::SliceSharing& in, const std::string& prefix,
                           core::SliceSharing* out, Refusals* refusals) {
  // Unset is the core's default rule; a number this server does not know is
  // nullopt, which the core refuses.
  out->rule = in.rule() == v1::SLICE_SHARE_RULE_UNSPECIFIED
                  ? std::optional<core::SliceShareRule>(core::SliceShareRule::kBonferroni)
                  : SliceShareRuleFromProto(in.rule());
  if (refusals->RefuseList(prefix + ".weights", in.weights_size(), core::kMaxSlices)) {
    for (const v1::SliceWeight& w : in.weights()) {
      out->weights.push_back({w.slice_name(), w.weight()});
    }
  }
}

Converted<core::CertifyRequest> CertifyRequestFromProto(const v1::CertifyRequest& in) {
  Converted<core::CertifyRequest> out;
  core::CertifyRequest& r = out.request;
  EvidenceFromProto(in.evidence(), "evidence", &r.evidence, &out.refusals);
  r.failure_probability = in.failure_probability();
  switch (in.family_choice_case()) {
    case v1::CertifyRequest::kListed: {
      r.family_choice = core::FamilyChoice::kListed;
      // Sizes first: an oversized list is refused and no entry is copied;
      // the other list cannot be judged without it.
      const bool families_fit = out.refusals.RefuseList(
          "listed.families", in.listed().families_size(), core::kMaxListedFamilies, "listed");
      const bool weights_fit =
          out.refusals.RefuseList("listed.delta_weights", in.listed().delta_weights_size(),
                                  core::kMaxListedDeltaWeights, "listed");
      if (families_fit && weights_fit) {
        for (int f : in.listed().families()) r.listed.families.push_back(FamilyFromProto(f));
        r.listed.delta_weights.assign(in.listed().delta_weights().begin(),
                                      in.listed().delta_weights().end());
      }
      break;
    }
    case v1::CertifyRequest::kAllApplicable:
      r.family_choice = core::FamilyChoice::kAllApplicable;
      break;
    case v1::CertifyRequest::FAMILY_CHOICE_NOT_SET:
      r.family_choice = core::FamilyChoice::kRecommended;
      break;
  }
  SliceSharingFromProto(in.slice_sharing(), "slice_sharing", &r.slice_sharing, &out.refusals);
  // Slices refused: a sharing "without slices" is about the refused list.
  if (static_cast<std::size_t>(in.evidence().slices_size()) > core::kMaxSlices) {
    out.refusals.skipped_exact.push_back("slice_sharing");
  }
  return out;
}

void CertificateToProto(const core::Certificate& in, v1::Certificate* out) {
  out->set_family(FamilyToProto(in.family));
  if (const core::FamilySpec* spec = core::FindFamily(in.family)) {
    out->set_family_name(std::string(spec->family_name));
    out->set_source(std::string(spec->source));
    out->set_assumptions(std::string(spec->assumptions));
  }
  out->set_risk_upper_bound(in.risk_upper_bound);
  if (in.risk_lower_bound.has_value()) out->set_risk_lower_bound(*in.risk_lower_bound);
  out->set_failure_probability(in.failure_probability);
  out->set_empirical_risk(in.empirical_risk);
  out->set_penalty(in.penalty);
  out->set_vacuous(in.vacuous);
  out->set_exact(in.exact);
  out->set_heuristic(in.heuristic);
  for (const std::string& note : in.notes) out->add_notes(note);
  if (in.loss_range.has_value()) {
    out->mutable_loss_range()->set_loss_min(in.loss_range->loss_min);
    out->mutable_loss_range()->set_loss_max(in.loss_range->loss_max);
  }
}

v1::CertifyResponse CertifyResponseToProto(const core::CertifyResult& result) {
  v1::CertifyResponse out;
  for (const core::Certificate& c : result.certificates) {
    CertificateToProto(c, out.add_certificates());
  }
  if (!result.certificates.empty()) {
    CertificateToProto(result.certificates[result.tightest_index], out.mutable_tightest());
  }
  v1::DeltaAccounting* ledger = out.mutable_delta_accounting();
  ledger->set_requested_failure_probability(result.requested_failure_probability);
  ledger->set_spent_failure_probability(result.spent_failure_probability);
  ledger->set_family_count(static_cast<std::uint32_t>(result.certificates.size()));
  ledger->set_rule(result.rule);
  for (const std::string& caution : result.cautions) out.add_cautions(caution);
  out.set_engine_version(RISKBOUND_ENGINE_VERSION);
  if (result.slices.has_value()) {
    const core::SliceSummary& in = *result.slices;
    v1::SliceSummary* s = out.mutable_slices();
    for (const core::SliceCertificate& c : in.slice_certificates) {
      v1::SliceCertificate* sc = s->add_slice_certificates();
      sc->set_slice_name(c.slice_name);
      CertificateToProto(c.certificate, sc->mutable_certificate());
    }
    s->set_rule(SliceShareRuleToProto(in.rule));
    s->set_failure_probability(in.failure_probability);
    s->set_spent_failure_probability(in.spent_failure_probability);
    s->set_worst_slice_upper_bound(in.worst_slice_upper_bound);
    s->set_worst_slice_name(in.worst_slice_name);
    s->set_statement(in.statement);
  }
  return out;
}

}  // namespace riskbound::rpc
