#include "service/rpc/gate_convert.h"

#include <openssl/evp.h>

#include <set>
#include <string>
#include <utility>
#include <vector>

#include "absl/strings/escaping.h"
#include "google/protobuf/io/coded_stream.h"
#include "google/protobuf/io/zero_copy_stream_impl_lite.h"
#include "service/core/certify.h"
#include "service/core/field_violation.h"
#include "service/core/limits.h"
#include "service/rpc/convert.h"

namespace riskbound::rpc {
namespace {

using core::FieldViolation;

// Used when the policy leaves plan_pass_probability unset (gate.proto).
constexpr double kDefaultPlanPassProbability = 0.8;

v1::Verdict VerdictToProto(core::Verdict v) {
  switch (v) {
    case core::Verdict::kPromote:
      return v1::VERDICT_PROMOTE;
    case core::Verdict::kHold:
      return v1::VERDICT_HOLD;
    case core::Verdict::kReject:
      return v1::VERDICT_REJECT;
  }
  return v1::VERDICT_UNSPECIFIED;
}

}  // namespace

absl::StatusOr<GateInputs> GateInputsFromProto(const v1::GateRequest& in) {
  std::vector<FieldViolation> violations;
  GateInputs out;

  const v1::GatePolicy& p = in.policy();
  // Sizes first: an oversized list or name gets one violation and is never
  // looked at further (core/limits.h). A name over its cap reaches the core
  // cut to the cap, so the core's other checks still run.
  const bool families_fit =
      core::CheckListSize("policy.allowed_families", p.allowed_families_size(),
                          core::kMaxAllowedFamilies, &violations);
  core::CheckTextSize("candidate.id", in.candidate().id(), core::kMaxIdBytes, &violations);
  if (in.has_champion()) {
    core::CheckTextSize("champion.champion_id", in.champion().champion_id(), core::kMaxIdBytes,
                        &violations);
  }
  // Paths the size checks refused: the core's findings under them are left out.
  std::set<std::string> refused;
  for (const FieldViolation& v : violations) refused.insert(v.field);

  out.policy.max_risk = p.max_risk();
  out.policy.failure_probability = p.failure_probability();
  // Unknown values (and BOUND_FAMILY_UNSPECIFIED) reach the core, which names
  // them as policy.allowed_families[i].
  if (families_fit) {
    for (int f : p.allowed_families()) {
      out.policy.allowed_families.push_back(static_cast<core::Family>(f));
    }
  }
  out.policy.min_holdout_sample_count = p.min_holdout_sample_count();
  if (p.has_max_regression()) out.policy.max_regression = p.max_regression();
  out.policy.plan_pass_probability =
      p.has_plan_pass_probability() ? p.plan_pass_probability() : kDefaultPlanPassProbability;

  out.candidate.id = in.candidate().id().substr(0, core::kMaxIdBytes);
  EvidenceFromProto(in.candidate().evidence(), "candidate.evidence", &out.candidate.evidence,
                    &violations);

  if (in.has_champion()) {
    const v1::ChampionComparison& c = in.champion();
    core::ChampionComparison champion;
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
        break;  // core::DecideGate names the missing comparison ("champion").
    }
    out.champion = std::move(champion);
  }

  if (violations.empty()) return out;
  // An oversized list: the rest of the policy cannot be judged without it.
  if (!families_fit) return core::InvalidFields(violations);
  // Shape problems found: add the core's own findings so that one answer
  // names every bad field. The core validates before it computes anything.
  absl::StatusOr<core::GateDecision> decided =
      core::DecideGate(out.policy, out.candidate, out.champion);
  std::uint64_t unlisted = 0;
  if (!decided.ok()) {
    std::set<std::pair<std::string, std::string>> seen;
    for (const FieldViolation& v : violations) seen.emplace(v.field, v.description);
    core::ViolationReport found = core::ViolationReportOf(decided.status());
    for (FieldViolation& v : found.listed) {
      if (refused.count(v.field) > 0) continue;
      if (seen.emplace(v.field, v.description).second) violations.push_back(std::move(v));
    }
    unlisted = found.unlisted_count;
  }
  return core::InvalidFields(violations, unlisted);
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

const std::vector<std::string>& GateCautions() {
  static const std::vector<std::string>* const kCautions = [] {
    auto* c = new std::vector<std::string>(core::Cautions());
    c->push_back(
        "A verdict holds only if the policy was fixed before the evidence was seen and the "
        "hold-out set was used for this decision alone: gating again on the same hold-out set "
        "after changing the policy or the model spends the failure probability again.");
    return c;
  }();
  return *kCautions;
}

v1::GateResponse GateResponseToProto(const core::GateDecision& d, const v1::GateRequest& request,
                                     absl::Time now) {
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
  double spent = 0.0;
  for (const auto& [test, delta] : d.delta_ledger) {
    v1::DeltaSpend* entry = out.add_delta_ledger();
    entry->set_test(test);
    entry->set_failure_probability(delta);
    spent += delta;
  }

  v1::AuditRecord* audit = out.mutable_audit();
  audit->set_engine_version(RISKBOUND_ENGINE_VERSION);
  audit->set_request_sha256(Sha256Hex(CanonicalGateRequestBytes(request)));
  for (core::Family f : d.families_used) {
    audit->add_families_used(static_cast<v1::BoundFamily>(f));
  }
  audit->set_spent_failure_probability(spent);
  audit->set_timestamp(FormatAuditTimestamp(now));
  for (const std::string& caution : GateCautions()) audit->add_cautions(caution);
  return out;
}

}  // namespace riskbound::rpc
