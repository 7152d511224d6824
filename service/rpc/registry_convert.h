// ScoreRegistry's pieces that need no stream: the run's settings copied to
// the core, one record scored as the Certify or Gate call it becomes, and
// the run's summary. The sharing of delta across records is
// core::RegistryLedger's; the scoring is HandleCertify's and HandleGate's;
// nothing here decides.
#ifndef RISKBOUND_SERVICE_RPC_REGISTRY_CONVERT_H_
#define RISKBOUND_SERVICE_RPC_REGISTRY_CONVERT_H_

#include <cstdint>
#include <string>

#include "absl/status/status.h"
#include "riskbound/v1/registry.pb.h"
#include "service/core/registry.h"
#include "service/core/stop.h"
#include "service/rpc/handlers.h"
#include "service/rpc/refusals.h"

namespace riskbound::rpc {

// RegistrySettingsFromProto
// The core settings, paths "settings.<field>". Caps as CertifyRequest's
// listed families and GatePolicy's allowed families, and at most
// core::kMaxHoldoutSets hold-out sets (none copied past it); an unknown
// delta_sharing number arrives as nullopt. Thread-safe.
Converted<core::RegistrySettings> RegistrySettingsFromProto(const v1::ScoreSettings& in);

// ValidatedSettings
// RegistrySettingsFromProto, then core::ValidateRegistrySettings: the core
// settings, or INVALID_ARGUMENT naming every bad field. Thread-safe.
absl::StatusOr<core::RegistrySettings> ValidatedSettings(const v1::ScoreSettings& in);

// What a run has answered so far, for its summary.
struct RegistryTally {
  std::uint64_t record_count = 0;
  std::uint64_t error_count = 0;
  std::uint64_t promote_count = 0;
  std::uint64_t hold_count = 0;
  std::uint64_t reject_count = 0;
  std::uint64_t vacuous_count = 0;
  std::uint64_t non_vacuous_count = 0;
  std::uint64_t ledger_only_record_count = 0;

  // Counts one result.
  void Add(const v1::RecordResult& result);
};

// ScoreRecord
// The result of the record at `record_index`: its share from `ledger`, then
// the CertifyRequest (certify mode) or GateRequest (gate mode: policy from
// the settings at the record's share, candidate.id = record_id) it becomes,
// answered by HandleCertify or HandleGate; the share is committed to the
// ledger only when the record was scored. Any failure becomes
// result.error, with field paths relative to the record ("evidence.*",
// "champion.*", "record_id", "holdout_set_id", "delta_weight"; a settings
// field as "settings.*"). Answers larger than `max_result_bytes` become a
// RESOURCE_EXHAUSTED error. `call` is the record's stop token and the
// stream's request id (a gate answer's audit.request_id). REQUIRES:
// `settings` passed ValidatedSettings.
v1::RecordResult ScoreRecord(const v1::ScoreSettings& settings, const v1::RegistryRecord& record,
                             std::uint64_t record_index, std::int64_t max_result_bytes,
                             core::RegistryLedger* ledger, const CallInfo& call);

// CountLedgerOnly
// A record re-sent with ledger_only: its share counted against its set
// again, nothing scored. FAILED_PRECONDITION when it does not fit (the
// resumed run's earlier records do not fit these settings).
absl::Status CountLedgerOnly(const v1::RegistryRecord& record, core::RegistryLedger* ledger);

// ItemErrorResult
// The error result of a message that did not decode, or a second settings
// message, at `record_index`.
v1::RecordResult ItemErrorResult(std::uint64_t record_index, const std::string& field,
                                 const std::string& message);

// RunSummaryOf
// The summary after the last record.
v1::RunSummary RunSummaryOf(const v1::ScoreSettings& settings, const core::RegistrySettings& core,
                            const core::RegistryLedger& ledger, const RegistryTally& tally);

}  // namespace riskbound::rpc

#endif  // RISKBOUND_SERVICE_RPC_REGISTRY_CONVERT_H_
