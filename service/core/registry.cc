#include "service/core/registry.h"

#include <cmath>
#include <cstdlib>
#include <limits>
#include <set>

#include "absl/strings/str_cat.h"
#include "absl/strings/str_format.h"
#include "service/core/families.h"
#include "service/core/field_violation.h"
#include "service/core/limits.h"

namespace riskbound::core {
namespace {

constexpr double kInf = std::numeric_limits<double>::infinity();

// a / k rounded toward zero: the largest double q with q * k <= a exactly.
// REQUIRES: a > 0, 1 <= k <= 2^53 (k is then an exact double).
double DivideDown(double a, std::uint64_t k) {
  const double kd = static_cast<double>(k);
  double q = a / kd;
  // fma rounds q * k - a once, so its sign is the exact product's.
  while (q > 0.0 && std::fma(q, kd, -a) > 0.0) q = std::nextafter(q, 0.0);
  return q;
}

// a * w rounded toward zero. REQUIRES: a, w >= 0.
double MultiplyDown(double a, double w) {
  double q = a * w;
  while (q > 0.0 && std::fma(a, w, -q) < 0.0) q = std::nextafter(q, 0.0);
  return q;
}

// a + b rounded upward (an upper bound on the exact sum).
double AddUp(double a, double b) {
  const double s = a + b;
  // Knuth's TwoSum: the exact error of the rounded sum.
  const double bb = s - a;
  const double err = (a - (s - bb)) + (b - bb);
  return err > 0.0 ? std::nextafter(s, kInf) : s;
}

// a * k rounded upward. REQUIRES: a >= 0, k exact as a double.
double MultiplyUp(double a, std::uint64_t k) {
  const double kd = static_cast<double>(k);
  const double p = a * kd;
  return std::fma(a, kd, -p) > 0.0 ? std::nextafter(p, kInf) : p;
}

// The certify-mode family list, without any evidence to judge whether a
// family applies (each record's Certify judges that).
void CheckListedFamilies(const FamilyList& listed, std::vector<FieldViolation>* v) {
  const std::string prefix = "settings.certify.listed";
  if (listed.families.empty()) {
    v->push_back({prefix + ".families", "list at least one bound family"});
  }
  CheckListSize(prefix + ".families", listed.families.size(), kMaxListedFamilies, v);
  std::set<Family> seen;
  for (std::size_t i = 0; i < listed.families.size() && i < kMaxListedFamilies; ++i) {
    const std::string field = absl::StrCat(prefix, ".families[", i, "]");
    const FamilySpec* spec =
        listed.families[i].has_value() ? FindFamily(*listed.families[i]) : nullptr;
    if (spec == nullptr) {
      v->push_back({field,
                    "unknown bound family (unset, or a value this server does not know; "
                    "ListFamilies lists them)"});
    } else if (!seen.insert(spec->family).second) {
      v->push_back({field, absl::StrCat(spec->family_name, " is listed twice")});
    }
  }
}

// delta for a sentence saying "at least 1 - delta": six significant digits
// when they do not understate it, else every digit.
std::string DeltaText(double delta) {
  std::string text = absl::StrFormat("%.6g", delta);
  if (std::strtod(text.c_str(), nullptr) < delta) text = absl::StrFormat("%.17g", delta);
  return text;
}

}  // namespace

absl::Status ValidateRegistrySettings(const RegistrySettings& s) {
  std::vector<FieldViolation> v;
  if (s.certify.has_value() == s.gate.has_value()) {
    v.push_back({"settings", s.certify.has_value()
                                 ? "give one mode, certify or gate, not both"
                                 : "give a mode: settings.certify or settings.gate"});
  }
  if (s.certify.has_value()) {
    // 0 (-0.0 too) is the unset field: the default applies.
    if (s.certify->failure_probability != 0.0) {
      CheckProbabilityOpen("settings.certify.failure_probability", s.certify->failure_probability,
                           &v);
    }
    if (s.certify->family_choice == FamilyChoice::kListed) {
      CheckListedFamilies(s.certify->listed, &v);
    }
  }
  if (s.gate.has_value()) CheckGatePolicy(*s.gate, "settings.gate", &v);
  if (!s.delta_sharing.has_value()) {
    v.push_back({"settings.delta_sharing",
                 "unknown value (DELTA_SHARING_PER_RECORD or DELTA_SHARING_PER_HOLDOUT_SET)"});
  }
  const bool shared = s.delta_sharing == DeltaSharing::kPerHoldoutSet;
  if (shared && s.holdout_sets.empty()) {
    v.push_back({"settings.holdout_sets",
                 "per-holdout-set sharing needs every hold-out set declared, with its record "
                 "count, before any record"});
  }
  if (!shared && !s.holdout_sets.empty()) {
    v.push_back({"settings.holdout_sets",
                 "hold-out sets are declared only for DELTA_SHARING_PER_HOLDOUT_SET"});
  }
  CheckListSize("settings.holdout_sets", s.holdout_sets.size(), kMaxHoldoutSets, &v);
  std::set<std::string> ids;
  for (std::size_t i = 0; i < s.holdout_sets.size() && i < kMaxHoldoutSets; ++i) {
    const HoldoutSetPlan& plan = s.holdout_sets[i];
    const std::string at = absl::StrCat("settings.holdout_sets[", i, "]");
    if (plan.holdout_set_id.empty()) {
      v.push_back({at + ".holdout_set_id", "must name the hold-out set"});
    } else if (CheckTextSize(at + ".holdout_set_id", plan.holdout_set_id, kMaxIdBytes, &v) &&
               !ids.insert(plan.holdout_set_id).second) {
      v.push_back({at + ".holdout_set_id", absl::StrCat("\"", SanitizeText(plan.holdout_set_id, 64),
                                                        "\" is declared twice")});
    }
    if (plan.record_count == 0 || plan.record_count > kMaxRecordsPerHoldoutSet) {
      v.push_back({at + ".record_count",
                   absl::StrCat("must be the number of records scored on this set, 1 to ",
                                kMaxRecordsPerHoldoutSet, ", got ", plan.record_count)});
    }
  }
  return InvalidFields(v);
}

double RunFailureProbability(const RegistrySettings& settings) {
  if (settings.certify.has_value()) {
    const double delta = settings.certify->failure_probability;
    return delta == 0.0 ? kDefaultRunFailureProbability : delta;
  }
  return settings.gate.has_value() ? settings.gate->failure_probability : 0.0;
}

RegistryLedger::RegistryLedger(const RegistrySettings& settings)
    : sharing_(settings.delta_sharing.value_or(DeltaSharing::kPerRecord)),
      delta_(RunFailureProbability(settings)) {
  if (sharing_ != DeltaSharing::kPerHoldoutSet) return;
  for (const HoldoutSetPlan& plan : settings.holdout_sets) {
    Account account;
    account.plan = plan;
    account.equal_share = DivideDown(delta_, plan.record_count);
    index_.emplace(plan.holdout_set_id, accounts_.size());
    accounts_.push_back(std::move(account));
  }
}

absl::StatusOr<RegistryLedger::Allotment> RegistryLedger::Allot(const std::string& holdout_set_id,
                                                                double delta_weight) const {
  Allotment out;
  if (!std::isfinite(delta_weight) || delta_weight < 0.0 || delta_weight > 1.0) {
    return InvalidFields(
        {{"delta_weight", "must be a weight in (0, 1], or 0 for the equal share"}});
  }
  if (sharing_ == DeltaSharing::kPerRecord) {
    if (delta_weight != 0.0) {
      return InvalidFields({{"delta_weight",
                             "weights share delta within a hold-out set: they need "
                             "DELTA_SHARING_PER_HOLDOUT_SET"}});
    }
    out.failure_probability = delta_;
    return out;
  }
  if (holdout_set_id.empty()) {
    return InvalidFields({{"holdout_set_id",
                           "required under per-holdout-set sharing: the declared hold-out set "
                           "this record was scored on"}});
  }
  const auto it = index_.find(holdout_set_id);
  if (it == index_.end()) {
    return InvalidFields({{"holdout_set_id", absl::StrCat("\"", SanitizeText(holdout_set_id, 64),
                                                          "\" is not a declared hold-out set "
                                                          "(settings.holdout_sets)")}});
  }
  const Account& a = accounts_[it->second];
  if (a.scored >= a.plan.record_count) {
    return InvalidFields(
        {{"holdout_set_id",
          absl::StrCat("the ", a.plan.record_count, " records declared for hold-out set \"",
                       SanitizeText(holdout_set_id, 64),
                       "\" are already scored; another would spend more than delta on it")}});
  }
  out.account = it->second;
  if (delta_weight == 0.0) {
    if (a.weighted > 0) {
      return InvalidFields({{"delta_weight",
                             "this hold-out set's earlier records gave weights: give every "
                             "record of a set a weight, or none"}});
    }
    out.failure_probability = a.equal_share;
    return out;
  }
  if (a.scored > a.weighted) {
    return InvalidFields({{"delta_weight",
                           "this hold-out set's earlier records took the equal share: give "
                           "every record of a set a weight, or none"}});
  }
  const double share = MultiplyDown(delta_, delta_weight);
  if (share <= 0.0) {
    // A subnormal weight: delta * delta_weight rounds down to 0, which no
    // statement can be made at.
    return InvalidFields(
        {{"delta_weight",
          absl::StrFormat("the share delta * delta_weight = %.17g * %.17g rounds to 0: give a "
                          "larger weight, or 0 for the equal share",
                          delta_, delta_weight)}});
  }
  if (AddUp(a.weighted_spent, share) > delta_) {
    return InvalidFields(
        {{"delta_weight",
          absl::StrFormat("this share would bring hold-out set \"%s\" above delta: %.17g "
                          "already spent of %.17g",
                          SanitizeText(holdout_set_id, 64), a.weighted_spent, delta_)}});
  }
  out.failure_probability = share;
  out.weighted = true;
  return out;
}

void RegistryLedger::Commit(const Allotment& allotment) {
  if (!allotment.account.has_value()) return;
  Account& a = accounts_[*allotment.account];
  ++a.scored;
  if (allotment.weighted) {
    ++a.weighted;
    a.weighted_spent = AddUp(a.weighted_spent, allotment.failure_probability);
  }
}

double RegistryLedger::Spent(const Account& a) const {
  if (a.weighted > 0) return a.weighted_spent;
  // scored <= K, so the exact product is at most K * (delta / K) <= delta,
  // and rounding it upward cannot pass delta (itself a double).
  return MultiplyUp(a.equal_share, a.scored);
}

std::vector<HoldoutSetSpend> RegistryLedger::Spends() const {
  std::vector<HoldoutSetSpend> out;
  out.reserve(accounts_.size());
  for (const Account& a : accounts_) {
    out.push_back({a.plan.holdout_set_id, a.scored, a.plan.record_count, Spent(a)});
  }
  return out;
}

std::string RegistryLedger::Statement(std::uint64_t scored) const {
  if (sharing_ == DeltaSharing::kPerRecord) {
    return absl::StrFormat(
        "Per-record failure probability: each scored record holds with probability at least "
        "1 - %s on its own; statements about several records at once (such as the "
        "best of several models on one hold-out set) are not covered: use per-holdout-set "
        "sharing for those.",
        DeltaText(delta_));
  }
  return absl::StrFormat(
      "Failure probability shared per hold-out set (union bound over the records declared for "
      "each set): all statements about the records of one hold-out set hold together with "
      "probability at least 1 - %s, so a choice among them (the best model on a shared "
      "hold-out set) is covered; %d records scored, %d hold-out %s declared.",
      DeltaText(delta_), scored, accounts_.size(), accounts_.size() == 1 ? "set" : "sets");
}

}  // namespace riskbound::core
