#include "service/rpc/gate_convert.h"

#include <openssl/evp.h>

#include <string>
#include <utility>
#include <vector>

#include "absl/strings/escaping.h"
#include "google/protobuf/io/coded_stream.h"
#include "google/protobuf/io/zero_copy_stream_impl_lite.h"
#include "service/core/certify.h"
#include "service/core/limits.h"
#include "service/rpc/convert.h"
#include "service/rpc/enums.h"

namespace riskbound::rpc {

Converted<GateInputs> GateInputsFromProto(const v1::GateRequest& in) {
  Converted<GateInputs> out;
  GateInputs& r = out.request;
  const v1::GatePolicy& p = in.policy();
  // Sizes first: an oversized list is refused and none of its entries is
  // copied; whether the policy's families can use the evidence cannot be
  // judged without it (core/limits.h).
  if (out.refusals.RefuseList("policy.allowed_families", p.allowed_families_size(),
                              core::kMaxAllowedFamilies)) {
    for (int f : p.allowed_families()) r.policy.allowed_families.push_back(FamilyFromProto(f));
  } else {
    out.refusals.skipped_exact.push_back("candidate.evidence");
    out.refusals.skipped_exact.push_back("candidate.evidence.holdout");
  }
  r.policy.max_risk = p.max_risk();
  r.policy.failure_probability = p.failure_probability();
  r.policy.min_holdout_sample_count = p.min_holdout_sample_count();
  if (p.has_max_regression()) r.policy.max_regression = p.max_regression();
  if (p.has_plan_pass_probability()) r.policy.plan_pass_probability = p.plan_pass_probability();
  r.policy.sequential = p.sequential();
  if (p.has_max_slice_risk()) r.policy.max_slice_risk = p.max_slice_risk();
  if (out.refusals.RefuseList("policy.slice_max_risks", p.slice_max_risks_size(),
                              core::kMaxSlices)) {
    for (const v1::SliceMaxRisk& l : p.slice_max_risks()) {
      r.policy.slice_max_risks.push_back({l.slice_name(), l.max_risk()});
    }
  } else {
    out.refusals.skipped_exact.push_back("policy.max_slice_risk");
  }
  SliceSharingFromProto(p.slice_sharing(), "policy.slice_sharing", &r.policy.slice_sharing,
                        &out.refusals);

  out.refusals.RefuseText("candidate.id", in.candidate().id(), core::kMaxIdBytes);
  r.candidate.id = in.candidate().id().substr(0, core::kMaxIdBytes);
  EvidenceFromProto(in.candidate().evidence(), "candidate.evidence", &r.candidate.evidence,
                    &out.refusals);
  // Slices refused: weights "without slices" are about the refused list.
  if (static_cast<std::size_t>(in.candidate().evidence().slices_size()) > core::kMaxSlices) {
    out.refusals.skipped_exact.push_back("policy.slice_sharing.weights");
  }

  if (in.has_champion()) {
    const v1::ChampionComparison& c = in.champion();
    core::ChampionComparison champion;
    out.refusals.RefuseText("champion.champion_id", c.champion_id(), core::kMaxIdBytes);
    champion.champion_id = c.champion_id().substr(0, core::kMaxIdBytes);
    switch (c.comparison_case()) {
      case v1::ChampionComparison::kPaired:
        champion.paired = core::PairedCounts{
            c.paired().both_wrong_count(), c.paired().only_champion_wrong_count(),
            c.paired().only_challenger_wrong_count(), c.paired().sample_count()};
        break;
      case v1::ChampionComparison::kChampionHoldout:
        champion.champion_holdout = core::SampleCounts{c.champion_holdout().error_count(),
                                                       c.champion_holdout().sample_count()};
        break;
      case v1::ChampionComparison::COMPARISON_NOT_SET:
        break;  // the core names the missing comparison ("champion")
    }
    r.champion = std::move(champion);
  }
  return out;
}

std::string CanonicalGateRequestBytes(const v1::GateRequest& request) {
  v1::GateRequest copy = request;
  copy.DiscardUnknownFields();
  std::string bytes;
  {
    google::protobuf::io::StringOutputStream stream(&bytes);
    google::protobuf::io::CodedOutputStream coded(&stream);
    coded.SetSerializationDeterministic(true);
    copy.SerializeToCodedStream(&coded);
  }  // The coded stream trims `bytes` to the written size when destroyed.
  return bytes;
}

std::string Sha256Hex(absl::string_view bytes) {
  unsigned char digest[EVP_MAX_MD_SIZE];
  unsigned int length = 0;
  if (EVP_Digest(bytes.data(), bytes.size(), digest, &length, EVP_sha256(), nullptr) != 1) {
    return std::string();  // Only on allocation failure inside OpenSSL.
  }
  return absl::BytesToHexString(
      absl::string_view(reinterpret_cast<const char*>(digest), length));
}

std::string FormatAuditTimestamp(absl::Time t) {
  return absl::FormatTime("%Y-%m-%d%ET%H:%M:%E*SZ", t, absl::UTCTimeZone());
}

v1::GateResponse GateResponseToProto(const core::GateDecision& d, const v1::GateRequest& request,
                                     absl::Time now, absl::string_view request_id) {
  v1::GateResponse out;
  out.set_verdict(VerdictToProto(d.verdict));
  for (const std::string& reason : d.reasons) out.add_reasons(reason);
  CertificateToProto(d.risk_certificate, out.mutable_risk_certificate());
  if (d.risk_lower_bound.has_value()) out.set_risk_lower_bound(*d.risk_lower_bound);
  if (d.difference_upper_bound.has_value()) {
    out.set_difference_upper_bound(*d.difference_upper_bound);
  }
  if (d.difference_lower_bound.has_value()) {
    out.set_difference_lower_bound(*d.difference_lower_bound);
  }
  if (d.mcnemar_p_value.has_value()) out.set_mcnemar_p_value(*d.mcnemar_p_value);
  if (d.additional_sample_count.has_value()) {
    out.set_additional_sample_count(*d.additional_sample_count);
  }
  for (const core::DeltaSpend& spend : d.delta_ledger) {
    v1::DeltaSpend* entry = out.add_delta_ledger();
    entry->set_test(spend.test);
    entry->set_failure_probability(spend.failure_probability);
    if (!spend.slice_name.empty()) entry->set_slice_name(spend.slice_name);
  }
  for (const core::SliceCheck& c : d.slices) {
    v1::SliceCheck* s = out.add_slices();
    s->set_slice_name(c.slice_name);
    s->set_outcome(SliceOutcomeToProto(c.outcome));
    s->set_max_risk(c.max_risk);
    s->set_error_count(c.error_count);
    s->set_sample_count(c.sample_count);
    s->set_risk_upper_bound(c.risk_upper_bound);
    s->set_risk_lower_bound(c.risk_lower_bound);
    s->set_failure_probability(c.failure_probability);
    if (c.additional_sample_count.has_value()) {
      s->set_additional_sample_count(*c.additional_sample_count);
    }
    s->set_reason(c.reason);
  }

  v1::AuditRecord* audit = out.mutable_audit();
  audit->set_engine_version(RISKBOUND_ENGINE_VERSION);
  audit->set_request_sha256(Sha256Hex(CanonicalGateRequestBytes(request)));
  for (core::Family f : d.families_used) audit->add_families_used(FamilyToProto(f));
  audit->set_spent_failure_probability(d.spent_failure_probability);
  audit->set_timestamp(FormatAuditTimestamp(now));
  for (const std::string& caution : d.cautions) audit->add_cautions(caution);
  audit->set_request_id(std::string(request_id));
  return out;
}

}  // namespace riskbound::rpc
