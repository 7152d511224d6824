// The registry run's settings and its delta ledger (service/core/registry.h).
#include "service/core/registry.h"

#include <cmath>
#include <cstdint>
#include <string>
#include <vector>

#include "absl/status/status.h"
#include "gmock/gmock.h"
#include "gtest/gtest.h"
#include "service/core/field_violation.h"

namespace riskbound::core {
namespace {

using ::testing::Contains;
using ::testing::Field;
using ::testing::HasSubstr;

std::vector<std::string> Fields(const absl::Status& status) {
  std::vector<std::string> out;
  for (const FieldViolation& v : FieldViolationsOf(status)) out.push_back(v.field);
  return out;
}

RegistrySettings CertifyRun(double delta) {
  RegistrySettings s;
  s.certify.emplace();
  s.certify->failure_probability = delta;
  return s;
}

RegistrySettings SharedRun(double delta, std::vector<HoldoutSetPlan> sets) {
  RegistrySettings s = CertifyRun(delta);
  s.delta_sharing = DeltaSharing::kPerHoldoutSet;
  s.holdout_sets = std::move(sets);
  return s;
}

TEST(RegistrySettingsTest, EveryBadFieldAtOnce) {
  RegistrySettings none;
  EXPECT_THAT(Fields(ValidateRegistrySettings(none)), Contains("settings"));

  RegistrySettings s = SharedRun(1.5, {{"", 0}, {"a", 3}, {"a", 20000000}});
  s.certify->family_choice = FamilyChoice::kListed;
  s.certify->listed.families = {Family::kHoldoutExactBinomial, Family::kHoldoutExactBinomial,
                                std::nullopt};
  const std::vector<std::string> fields = Fields(ValidateRegistrySettings(s));
  EXPECT_THAT(fields, Contains("settings.certify.failure_probability"));
  EXPECT_THAT(fields, Contains("settings.certify.listed.families[1]"));
  EXPECT_THAT(fields, Contains("settings.certify.listed.families[2]"));
  EXPECT_THAT(fields, Contains("settings.holdout_sets[0].holdout_set_id"));
  EXPECT_THAT(fields, Contains("settings.holdout_sets[0].record_count"));
  EXPECT_THAT(fields, Contains("settings.holdout_sets[2].holdout_set_id"));  // declared twice
  EXPECT_THAT(fields, Contains("settings.holdout_sets[2].record_count"));

  RegistrySettings both = CertifyRun(0.05);
  both.gate.emplace();
  both.gate->max_risk = 2.0;
  both.delta_sharing = std::nullopt;
  const std::vector<std::string> f2 = Fields(ValidateRegistrySettings(both));
  EXPECT_THAT(f2, Contains("settings"));
  EXPECT_THAT(f2, Contains("settings.gate.max_risk"));
  EXPECT_THAT(f2, Contains("settings.delta_sharing"));

  RegistrySettings shared_without_sets = SharedRun(0.05, {});
  EXPECT_THAT(Fields(ValidateRegistrySettings(shared_without_sets)),
              Contains("settings.holdout_sets"));
  EXPECT_TRUE(ValidateRegistrySettings(SharedRun(0.05, {{"june-audit", 40}})).ok());
  EXPECT_TRUE(ValidateRegistrySettings(CertifyRun(0.05)).ok());
}

// ScoreSettings' contract (registry.proto, CertifySettings.failure_probability):
// "0 means 0.05". -0.0 is the same number (IEEE 754: -0 == +0). Found by the
// bad-input table (tests/integration/bad_input_table_test.py): 0 was refused.
TEST(RegistrySettingsTest, ZeroCertifyDeltaIsTheDefault) {
  for (double zero : {0.0, -0.0}) {
    const RegistrySettings s = CertifyRun(zero);
    EXPECT_TRUE(ValidateRegistrySettings(s).ok()) << zero;
    EXPECT_EQ(RunFailureProbability(s), 0.05);
    RegistryLedger ledger(s);
    auto a = ledger.Allot("", 0.0);
    ASSERT_TRUE(a.ok());
    EXPECT_EQ(a->failure_probability, 0.05);
    EXPECT_THAT(ledger.Statement(1), HasSubstr("0.05"));
  }
  RegistryLedger shared(SharedRun(0.0, {{"s", 4}}));
  auto q = shared.Allot("s", 0.0);
  ASSERT_TRUE(q.ok());
  EXPECT_EQ(q->failure_probability, 0.0125);  // 0.05 / 4, exact in binary64
  for (double bad : {-0.05, 1.0, std::nan("")}) {
    EXPECT_THAT(Fields(ValidateRegistrySettings(CertifyRun(bad))),
                Contains("settings.certify.failure_probability"))
        << bad;
  }
}

// A subnormal weight is in (0, 1], but its share delta * w rounds down to 0:
// refused saying so, not as an overspend. Source: IEEE 754 binary64, the
// smallest subnormal 2^-1074 times 0.05 rounds to 0.
TEST(RegistryLedgerTest, WeightWhoseShareRoundsToZeroIsNamedAsSuch) {
  RegistryLedger ledger(SharedRun(0.05, {{"s", 1}}));
  const absl::Status refused = ledger.Allot("s", std::ldexp(1.0, -1074)).status();
  EXPECT_THAT(Fields(refused), Contains("delta_weight"));
  EXPECT_THAT(std::string(refused.message()), HasSubstr("rounds to 0"));
  EXPECT_TRUE(ledger.Allot("s", 1e-300).ok());
}

TEST(RegistryLedgerTest, PerRecordGivesEveryRecordTheWholeDelta) {
  RegistryLedger ledger(CertifyRun(0.01));
  for (int i = 0; i < 5; ++i) {
    auto a = ledger.Allot("", 0.0);
    ASSERT_TRUE(a.ok());
    EXPECT_EQ(a->failure_probability, 0.01);
    ledger.Commit(*a);
  }
  EXPECT_TRUE(ledger.Spends().empty());
  EXPECT_THAT(ledger.Statement(5), HasSubstr("on its own"));
  EXPECT_THAT(Fields(ledger.Allot("", 0.5).status()), Contains("delta_weight"));
}

// The equal share q of K records is the largest double with q * K <= delta,
// checked exactly: fma(q, K, -delta) rounds q * K - delta once, so its sign
// is the sign of the exact value. Source: IEEE 754-2008, fusedMultiplyAdd
// (a single rounding), so this is exact rational arithmetic.
TEST(RegistryLedgerTest, EqualSharesNeverOverspendAndAreLargest) {
  const std::vector<double> deltas = {0.05, 0.1, 1e-9, 0.3, 0.0123456789, 1e-300, 0.999};
  for (double delta : deltas) {
    for (std::uint64_t k = 1; k <= 200; ++k) {
      RegistryLedger ledger(SharedRun(delta, {{"set", k}}));
      auto a = ledger.Allot("set", 0.0);
      ASSERT_TRUE(a.ok());
      const double q = a->failure_probability;
      const double kd = static_cast<double>(k);
      EXPECT_LE(std::fma(q, kd, -delta), 0.0) << delta << " " << k;
      EXPECT_GT(std::fma(std::nextafter(q, 1.0), kd, -delta), 0.0) << delta << " " << k;
      for (std::uint64_t i = 0; i < k; ++i) {
        auto b = ledger.Allot("set", 0.0);
        ASSERT_TRUE(b.ok()) << i;
        ledger.Commit(*b);
      }
      // The (K+1)-th record would overspend.
      EXPECT_THAT(Fields(ledger.Allot("set", 0.0).status()), Contains("holdout_set_id"));
      const HoldoutSetSpend spend = ledger.Spends()[0];
      EXPECT_EQ(spend.scored_record_count, k);
      EXPECT_LE(spend.spent_failure_probability, delta);
      EXPECT_GE(spend.spent_failure_probability, q);
    }
  }
}

// Weights 0.5 + 0.5000000000000001 sum to more than 1 in exact arithmetic:
// the second share is refused. Source: exact decimal value of the double
// 0.5000000000000001 = 0.5 + 2^-53 (IEEE 754 binary64).
TEST(RegistryLedgerTest, WeightsAreCheckedSoTheSetNeverOverspends) {
  RegistryLedger ledger(SharedRun(0.05, {{"shared", 3}, {"other", 2}}));
  auto first = ledger.Allot("shared", 0.5);
  ASSERT_TRUE(first.ok());
  EXPECT_LE(first->failure_probability, 0.025);
  ledger.Commit(*first);
  EXPECT_THAT(Fields(ledger.Allot("shared", 0.5000000000000001).status()),
              Contains("delta_weight"));
  EXPECT_THAT(Fields(ledger.Allot("shared", 0.0).status()), Contains("delta_weight"));  // mixed
  auto second = ledger.Allot("shared", 0.5);
  ASSERT_TRUE(second.ok());
  ledger.Commit(*second);
  EXPECT_LE(ledger.Spends()[0].spent_failure_probability, 0.05);

  auto equal = ledger.Allot("other", 0.0);
  ASSERT_TRUE(equal.ok());
  ledger.Commit(*equal);
  EXPECT_THAT(Fields(ledger.Allot("other", 0.3).status()), Contains("delta_weight"));  // mixed
  EXPECT_THAT(Fields(ledger.Allot("", 0.0).status()), Contains("holdout_set_id"));
  EXPECT_THAT(Fields(ledger.Allot("nope\nforged: x", 0.0).status()), Contains("holdout_set_id"));
  EXPECT_THAT(Fields(ledger.Allot("other", 1.5).status()), Contains("delta_weight"));
  EXPECT_THAT(Fields(ledger.Allot("other", std::nan("")).status()), Contains("delta_weight"));
  EXPECT_THAT(ledger.Statement(3), HasSubstr("hold together"));
}

// An allotment that is never committed (the record was refused) spends
// nothing: K good records still fit after refused ones.
TEST(RegistryLedgerTest, RefusedRecordsSpendNothing) {
  RegistryLedger ledger(SharedRun(0.05, {{"s", 2}}));
  for (int i = 0; i < 10; ++i) ASSERT_TRUE(ledger.Allot("s", 0.0).ok());
  for (int i = 0; i < 2; ++i) {
    auto a = ledger.Allot("s", 0.0);
    ASSERT_TRUE(a.ok());
    ledger.Commit(*a);
  }
  EXPECT_EQ(ledger.Spends()[0].scored_record_count, 2u);
  EXPECT_EQ(ledger.Spends()[0].spent_failure_probability, 0.05);
}

}  // namespace
}  // namespace riskbound::core
