// Scoring a model registry: the run's settings, and how its failure
// probability is shared across records (API: ScoreSettings, RunSummary of
// riskbound.v1 registry.proto).
//
// A registry run scores many records, each with Certify or DecideGate. With
// per-record sharing every record gets the run's whole delta: each statement
// holds on its own. With per-holdout-set sharing the records scored on one
// hold-out set split delta among themselves (union bound, Boole's
// inequality), with the number of records K of each set declared before any
// record is seen, so every statement about that set's records holds
// together with probability at least 1 - delta: picking the best of K models
// on a shared hold-out set is then covered (Shalev-Shwartz & Ben-David 2014,
// Section 11.2, validation for model selection over a finite set of
// candidates).
#ifndef RISKBOUND_SERVICE_CORE_REGISTRY_H_
#define RISKBOUND_SERVICE_CORE_REGISTRY_H_

#include <cstdint>
#include <optional>
#include <string>
#include <vector>

#include "absl/container/flat_hash_map.h"
#include "absl/status/status.h"
#include "absl/status/statusor.h"
#include "service/core/certify.h"
#include "service/core/gate.h"

namespace riskbound::core {

// API: DeltaSharing.
enum class DeltaSharing {
  kPerRecord = 1,
  kPerHoldoutSet = 2,
};

// API: HoldoutSetPlan.
struct HoldoutSetPlan {
  std::string holdout_set_id;
  std::uint64_t record_count = 0;
};

// The run's delta in certify mode when settings.certify.failure_probability
// is 0 (unset): ScoreSettings' documented default.
inline constexpr double kDefaultRunFailureProbability = 0.05;

// Most hold-out sets one run may declare, and most records one set may
// declare.
inline constexpr std::size_t kMaxHoldoutSets = 10000;
inline constexpr std::uint64_t kMaxRecordsPerHoldoutSet = 10000000;

// API: ScoreSettings. Exactly one of certify and gate is set. Field paths
// are "settings.<field>".
struct RegistrySettings {
  // Certify mode: every field but evidence (ignored) is the template each
  // record's CertifyRequest starts from; its failure_probability is the
  // run's delta.
  std::optional<CertifyRequest> certify;
  // Gate mode: the policy every record is gated under; its
  // failure_probability is the run's delta.
  std::optional<GatePolicy> gate;
  // nullopt: a value this server does not know (refused). The API's
  // UNSPECIFIED arrives as kPerRecord.
  std::optional<DeltaSharing> delta_sharing = DeltaSharing::kPerRecord;
  std::vector<HoldoutSetPlan> holdout_sets;
};

// ValidateRegistrySettings
// Returns OK or INVALID_ARGUMENT naming every bad field at once:
// "settings" (no mode, or both), "settings.certify.failure_probability"
// (neither 0, the default, nor in (0, 1)),
// "settings.certify.listed.families[i]" (unknown or listed twice),
// "settings.certify.listed.delta_weights[i]", "settings.gate.<field>" (as
// ValidateGatePolicy), "settings.delta_sharing", "settings.holdout_sets"
// (none under per-holdout-set sharing, or too many),
// "settings.holdout_sets[i].holdout_set_id" (empty, too long, repeated),
// "settings.holdout_sets[i].record_count" (0 or above
// kMaxRecordsPerHoldoutSet, or a share too small for the gate).
absl::Status ValidateRegistrySettings(const RegistrySettings& settings);

// The run's delta: settings.certify->failure_probability
// (kDefaultRunFailureProbability when it is 0, unset) or
// settings.gate->failure_probability.
double RunFailureProbability(const RegistrySettings& settings);

// What one hold-out set's share of delta covered so far. API: HoldoutSetSpend.
struct HoldoutSetSpend {
  std::string holdout_set_id;
  std::uint64_t scored_record_count = 0;
  std::uint64_t declared_record_count = 0;
  // An upper bound on the exact sum of the shares handed out (each addition
  // rounded upward), never above the run's delta.
  double spent_failure_probability = 0.0;
};

// RegistryLedger
// Hands out each record's share of the run's delta and keeps the per-set
// accounts. One per run (stream); not thread-safe (a run scores its records
// one at a time).
class RegistryLedger {
 public:
  // REQUIRES: ValidateRegistrySettings(settings).ok().
  explicit RegistryLedger(const RegistrySettings& settings);

  // One record's share, not yet counted (Commit counts it).
  struct Allotment {
    // The failure probability the record is scored at.
    double failure_probability = 0.0;
    // Internal: the account and whether the share came from a weight.
    std::optional<std::size_t> account;
    bool weighted = false;
  };

  // Allot
  // Returns the failure probability the next record is scored at: the
  // run's delta under per-record sharing; under per-holdout-set sharing
  // delta / K of the record's set (rounded toward zero), or delta *
  // delta_weight (rounded toward zero) when delta_weight > 0. Counts
  // nothing: a record refused after its allotment spent nothing, so only
  // Commit counts. INVALID_ARGUMENT naming "holdout_set_id" (missing under
  // per-holdout-set sharing, not declared, or its K records already scored)
  // or "delta_weight" (outside [0, 1], given under per-record sharing, mixed
  // with unweighted records of the same set, or bringing the set's spend
  // above delta).
  absl::StatusOr<Allotment> Allot(const std::string& holdout_set_id, double delta_weight) const;

  // Commit
  // Counts `allotment` (from the latest Allot) against its set.
  void Commit(const Allotment& allotment);

  // The per-set accounts, in declaration order (empty under per-record
  // sharing).
  std::vector<HoldoutSetSpend> Spends() const;

  // Statement
  // One sentence saying what holds together, with which probability, for
  // `scored` records scored (for RunSummary.statement).
  std::string Statement(std::uint64_t scored) const;

 private:
  struct Account {
    HoldoutSetPlan plan;
    std::uint64_t scored = 0;
    std::uint64_t weighted = 0;   // records that gave a delta_weight
    double equal_share = 0.0;     // delta / K rounded toward zero
    double weighted_spent = 0.0;  // upper bound on the weighted shares' sum
  };
  double Spent(const Account& account) const;

  // Constant after construction.
  DeltaSharing sharing_;
  double delta_;
  std::vector<Account> accounts_;
  absl::flat_hash_map<std::string, std::size_t> index_;
};

}  // namespace riskbound::core

#endif  // RISKBOUND_SERVICE_CORE_REGISTRY_H_
