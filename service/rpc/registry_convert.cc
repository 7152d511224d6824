#include "service/rpc/registry_convert.h"

#include <algorithm>
#include <string>
#include <utility>
#include <vector>

#include "absl/status/statusor.h"
#include "absl/strings/match.h"
#include "absl/strings/str_cat.h"
#include "service/core/certify.h"
#include "service/core/field_violation.h"
#include "service/core/gate.h"
#include "service/core/limits.h"
#include "service/rpc/convert.h"
#include "service/rpc/enums.h"
#include "service/rpc/gate_convert.h"
#include "service/rpc/handlers.h"

namespace riskbound::rpc {
namespace {

// A path of a converted sub-request, re-rooted at `to` when it starts with
// the path component `from`.
bool Reroot(std::string* path, const std::string& from, const std::string& to) {
  if (*path == from) {
    *path = to;
    return true;
  }
  if (absl::StartsWith(*path, from + ".") || absl::StartsWith(*path, from + "[")) {
    *path = to + path->substr(from.size());
    return true;
  }
  return false;
}

// Moves the refusals of a sub-request at paths under `from` to the same
// paths under `to`; refusals elsewhere in the sub-request (parts the
// settings do not have) are dropped.
void RerootRefusals(Refusals in, const std::string& from, const std::string& to,
                    Refusals* out) {
  for (core::FieldViolation& v : in.violations) {
    if (Reroot(&v.field, from, to)) out->violations.push_back(std::move(v));
  }
  for (std::string& p : in.skipped) {
    if (Reroot(&p, from, to)) out->skipped.push_back(std::move(p));
  }
  for (std::string& p : in.skipped_exact) {
    if (Reroot(&p, from, to)) out->skipped_exact.push_back(std::move(p));
  }
}

// The path a violation of the Certify or Gate call a record became has
// relative to the record.
std::string RecordPath(std::string path, bool gate) {
  if (path == core::kSummaryField) return path;
  if (gate) {
    if (Reroot(&path, "candidate.evidence", "evidence")) return path;
    if (Reroot(&path, "candidate.id", "record_id")) return path;
    if (Reroot(&path, "candidate", "evidence")) return path;
    if (Reroot(&path, "policy", "settings.gate")) return path;
    return path;  // champion.* is the record's champion.*
  }
  if (Reroot(&path, "listed", "settings.certify.listed")) return path;
  return path;  // evidence.* is the record's evidence.*
}

void SetError(const absl::Status& status, bool gate, v1::RecordResult* out) {
  v1::RecordError* error = out->mutable_error();
  error->set_code(absl::StatusCodeToString(status.code()));
  error->set_message(std::string(status.message()));
  for (const core::FieldViolation& v : core::FieldViolationsOf(status)) {
    v1::RecordFieldViolation* f = error->add_field_violations();
    f->set_field(RecordPath(v.field, gate));
    f->set_description(v.description);
  }
  out->set_failure_probability(0.0);
}

}  // namespace

Converted<core::RegistrySettings> RegistrySettingsFromProto(const v1::ScoreSettings& in) {
  Converted<core::RegistrySettings> out;
  core::RegistrySettings& r = out.request;
  if (in.has_certify()) {
    v1::CertifyRequest as_request;
    as_request.set_failure_probability(in.certify().failure_probability());
    if (in.certify().has_listed()) *as_request.mutable_listed() = in.certify().listed();
    if (in.certify().has_all_applicable()) as_request.mutable_all_applicable();
    Converted<core::CertifyRequest> c = CertifyRequestFromProto(as_request);
    r.certify = std::move(c.request);
    RerootRefusals(std::move(c.refusals), "listed", "settings.certify.listed", &out.refusals);
  }
  if (in.has_gate()) {
    v1::GateRequest as_request;
    *as_request.mutable_policy() = in.gate();
    Converted<GateInputs> g = GateInputsFromProto(as_request);
    r.gate = std::move(g.request.policy);
    RerootRefusals(std::move(g.refusals), "policy", "settings.gate", &out.refusals);
  }
  r.delta_sharing = in.delta_sharing() == v1::DELTA_SHARING_UNSPECIFIED
                        ? std::optional<core::DeltaSharing>(core::DeltaSharing::kPerRecord)
                        : DeltaSharingFromProto(in.delta_sharing());
  if (out.refusals.RefuseList("settings.holdout_sets", in.holdout_sets_size(),
                              core::kMaxHoldoutSets)) {
    for (int i = 0; i < in.holdout_sets_size(); ++i) {
      const v1::HoldoutSetPlan& p = in.holdout_sets(i);
      const std::string at = absl::StrCat("settings.holdout_sets[", i, "].holdout_set_id");
      core::HoldoutSetPlan plan;
      plan.holdout_set_id = p.holdout_set_id();
      if (!out.refusals.RefuseText(at, plan.holdout_set_id, core::kMaxIdBytes)) {
        plan.holdout_set_id.resize(core::kMaxIdBytes);
      }
      plan.record_count = p.record_count();
      r.holdout_sets.push_back(std::move(plan));
    }
  }
  return out;
}

absl::StatusOr<core::RegistrySettings> ValidatedSettings(const v1::ScoreSettings& in) {
  Converted<core::RegistrySettings> c = RegistrySettingsFromProto(in);
  const absl::Status core_status = core::ValidateRegistrySettings(c.request);
  if (!c.refusals.empty()) return WithRefusals(c.refusals, core_status);
  if (!core_status.ok()) return core_status;
  return std::move(c.request);
}

void RegistryTally::Add(const v1::RecordResult& result) {
  ++record_count;
  switch (result.outcome_case()) {
    case v1::RecordResult::kError: ++error_count; break;
    case v1::RecordResult::kGated:
      switch (result.gated().verdict()) {
        case v1::VERDICT_PROMOTE: ++promote_count; break;
        case v1::VERDICT_HOLD: ++hold_count; break;
        case v1::VERDICT_REJECT: ++reject_count; break;
        default: break;
      }
      break;
    case v1::RecordResult::kCertified:
      if (result.certified().tightest().vacuous()) {
        ++vacuous_count;
      } else {
        ++non_vacuous_count;
      }
      break;
    case v1::RecordResult::OUTCOME_NOT_SET: break;
  }
}

v1::RecordResult ItemErrorResult(std::uint64_t record_index, const std::string& field,
                                 const std::string& message) {
  v1::RecordResult out;
  out.set_record_index(record_index);
  SetError(core::InvalidFields({{field, message}}), false, &out);
  return out;
}

v1::RecordResult ScoreRecord(const v1::ScoreSettings& settings, const v1::RegistryRecord& record,
                             std::uint64_t record_index, std::int64_t max_result_bytes,
                             core::RegistryLedger* ledger, const CallInfo& call) {
  v1::RecordResult out;
  out.set_record_index(record_index);
  const bool gate = settings.has_gate();
  Refusals refusals;
  std::string record_id = record.record_id();
  if (!refusals.RefuseText("record_id", record_id, core::kMaxIdBytes))
    record_id.resize(core::kMaxIdBytes);
  std::string name = record.model_name();
  if (!refusals.RefuseText("model_name", name, core::kMaxIdBytes)) name.resize(core::kMaxIdBytes);
  std::string version = record.model_version();
  if (!refusals.RefuseText("model_version", version, core::kMaxIdBytes)) {
    version.resize(core::kMaxIdBytes);
  }
  out.set_record_id(record_id);
  out.set_model_name(name);
  out.set_model_version(version);
  std::string set_id = record.holdout_set_id();
  if (!refusals.RefuseText("holdout_set_id", set_id, core::kMaxIdBytes)) {
    set_id.resize(core::kMaxIdBytes);
  }
  out.set_holdout_set_id(set_id);
  if (!refusals.empty()) {
    SetError(core::InvalidFields(refusals.violations), gate, &out);
    return out;
  }
  if (!gate && record.has_champion()) {
    SetError(core::InvalidFields({{"champion",
                                   "a champion comparison needs gate mode "
                                   "(settings.gate)"}}),
             gate, &out);
    return out;
  }
  absl::StatusOr<core::RegistryLedger::Allotment> allotment =
      ledger->Allot(record.holdout_set_id(), record.delta_weight());
  if (!allotment.ok()) {
    SetError(allotment.status(), gate, &out);
    return out;
  }
  const double share = allotment->failure_probability;
  absl::Status failed;
  if (gate) {
    v1::GateRequest request;
    *request.mutable_policy() = settings.gate();
    request.mutable_policy()->set_failure_probability(share);
    request.mutable_candidate()->set_id(record.record_id());
    *request.mutable_candidate()->mutable_evidence() = record.evidence();
    if (record.has_champion()) *request.mutable_champion() = record.champion();
    absl::StatusOr<v1::GateResponse> answer = HandleGate(request, call);
    if (answer.ok()) {
      *out.mutable_gated() = std::move(*answer);
    } else {
      failed = answer.status();
    }
  } else {
    v1::CertifyRequest request;
    *request.mutable_evidence() = record.evidence();
    request.set_failure_probability(share);
    if (settings.certify().has_listed()) *request.mutable_listed() = settings.certify().listed();
    if (settings.certify().has_all_applicable()) request.mutable_all_applicable();
    absl::StatusOr<v1::CertifyResponse> answer = HandleCertify(request, call);
    if (answer.ok()) {
      // The cautions every record shares are in the RunSummary once; a
      // record's own (the slices' caution) stay with it.
      const std::vector<std::string>& common = core::Cautions();
      google::protobuf::RepeatedPtrField<std::string>* cautions = answer->mutable_cautions();
      cautions->erase(std::remove_if(cautions->begin(), cautions->end(),
                                     [&common](const std::string& c) {
                                       return std::find(common.begin(), common.end(), c) !=
                                              common.end();
                                     }),
                      cautions->end());
      *out.mutable_certified() = std::move(*answer);
    } else {
      failed = answer.status();
    }
  }
  if (failed.ok() && static_cast<std::int64_t>(out.ByteSizeLong()) > max_result_bytes) {
    failed = absl::ResourceExhaustedError(absl::StrCat(
        "the record's answer would be ", out.ByteSizeLong(), " bytes, above the server's limit of ",
        max_result_bytes, " bytes (--max-response-bytes)"));
  }
  if (!failed.ok()) {
    SetError(failed, gate, &out);
    return out;
  }
  ledger->Commit(*allotment);
  out.set_failure_probability(share);
  return out;
}

absl::Status CountLedgerOnly(const v1::RegistryRecord& record, core::RegistryLedger* ledger) {
  absl::StatusOr<core::RegistryLedger::Allotment> allotment =
      ledger->Allot(record.holdout_set_id(), record.delta_weight());
  if (!allotment.ok()) {
    return absl::FailedPreconditionError(absl::StrCat(
        "a record re-sent with ledger_only (an earlier part of this run) does not fit the "
        "settings: ",
        allotment.status().message()));
  }
  ledger->Commit(*allotment);
  return absl::OkStatus();
}

v1::RunSummary RunSummaryOf(const v1::ScoreSettings& settings, const core::RegistrySettings& core,
                            const core::RegistryLedger& ledger, const RegistryTally& tally) {
  v1::RunSummary out;
  out.set_record_count(tally.record_count);
  out.set_error_count(tally.error_count);
  out.set_promote_count(tally.promote_count);
  out.set_hold_count(tally.hold_count);
  out.set_reject_count(tally.reject_count);
  out.set_vacuous_count(tally.vacuous_count);
  out.set_non_vacuous_count(tally.non_vacuous_count);
  out.set_ledger_only_record_count(tally.ledger_only_record_count);
  out.set_delta_sharing(
      DeltaSharingToProto(core.delta_sharing.value_or(core::DeltaSharing::kPerRecord)));
  out.set_failure_probability(core::RunFailureProbability(core));
  for (const core::HoldoutSetSpend& s : ledger.Spends()) {
    v1::HoldoutSetSpend* spend = out.add_holdout_sets();
    spend->set_holdout_set_id(s.holdout_set_id);
    spend->set_scored_record_count(s.scored_record_count);
    spend->set_declared_record_count(s.declared_record_count);
    spend->set_spent_failure_probability(s.spent_failure_probability);
  }
  out.set_statement(ledger.Statement(tally.record_count - tally.error_count));
  const std::vector<std::string>& cautions =
      settings.has_gate() ? core::GateCautions() : core::Cautions();
  for (const std::string& c : cautions) out.add_cautions(c);
  out.set_engine_version(RISKBOUND_ENGINE_VERSION);
  return out;
}

}  // namespace riskbound::rpc
