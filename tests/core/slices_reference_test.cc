// Slices against scipy: every slice's Clopper-Pearson limits at its
// Bonferroni or Sidak share, for Certify and the gate, and the error counts
// where a slice's gate outcome flips (fixtures written by
// tests/reference/fixtures_slices.py).
//
// Outward rounding: every upper limit is at or above the smallest double at
// or above the limit computed at 40 digits (mpmath.betainc), every lower
// limit at or below the largest double below it (fixture columns
// upper_outward, lower_outward).
//
// Weighted shares (rule "bonferroni-weighted", column weight): delta_slices
// times each slice's weight, powers of two, so exact in binary; checked as
// the equal Bonferroni shares are.
//
// Tolerances: relative 1e-9 on every limit. The core lowers every Sidak
// share by a relative 1e-9 on purpose (slices.h, SidakShare: surely below
// 1 - (1 - delta)^(1/G)), so Sidak shares are checked to lie in
// [1 - 1.1e-9, 1] times scipy's; the limits computed at those slightly
// smaller shares move outward by less than 1e-9 relative (their
// elasticity in the level is well below 1), so the same 1e-9 holds.
#include <algorithm>
#include <cstdint>
#include <map>
#include <string>
#include <vector>

#include "absl/strings/str_join.h"
#include "gtest/gtest.h"
#include "service/core/certify.h"
#include "service/core/gate.h"
#include "service/core/slices.h"
#include "tests/testing/fixture.h"

namespace riskbound::core {
namespace {

using ::riskbound::testing::FixtureRow;
using ::riskbound::testing::Num;
using ::riskbound::testing::ReadFixture;

std::uint64_t U(const FixtureRow& row, const char* key) {
  return static_cast<std::uint64_t>(std::stoull(row.at(key)));
}

SliceShareRule Rule(const FixtureRow& row) {
  return row.at("rule") == "sidak" ? SliceShareRule::kSidak : SliceShareRule::kBonferroni;
}

// The fixture's rows grouped into requests: every row of one request has the
// same key (all columns but the slice's own).
struct Group {
  std::vector<FixtureRow> rows;
  std::vector<SliceEvidence> slices;
  // Rule "bonferroni-weighted": the caller's weight of every slice.
  std::vector<SliceWeight> weights;
};

// The group's sharing: its rule, and its weights when it has them.
SliceSharing SharingOf(const Group& g) {
  SliceSharing sharing;
  sharing.rule = Rule(g.rows.front());
  sharing.weights = g.weights;
  return sharing;
}

std::vector<Group> GroupRows(const std::vector<FixtureRow>& rows,
                             const std::vector<std::string>& key_columns) {
  std::vector<Group> out;
  std::string last;
  for (const FixtureRow& row : rows) {
    std::vector<std::string> key;
    for (const std::string& c : key_columns) key.push_back(row.at(c));
    const std::string k = absl::StrJoin(key, ",");
    if (out.empty() || k != last) out.emplace_back();
    last = k;
    out.back().rows.push_back(row);
    SliceEvidence s;
    s.name = row.at("slice");
    s.error_count = U(row, "error_count");
    s.sample_count = U(row, "sample_count");
    out.back().slices.push_back(s);
    if (!row.at("weight").empty()) out.back().weights.push_back({s.name, Num(row, "weight")});
  }
  return out;
}

// The core's share and limits against scipy's, with the Sidak allowance
// described at the top of the file.
void ExpectMatches(SliceShareRule rule, double share, double upper, double lower,
                   const FixtureRow& row) {
  const double ref_share = Num(row, "share");
  const double ref_upper = Num(row, "upper");
  const double ref_lower = Num(row, "lower");
  const double rel = 1e-9;
  if (rule == SliceShareRule::kSidak) {
    EXPECT_LE(share, ref_share);
    EXPECT_GE(share, ref_share * (1 - 1.1e-9));
  } else {
    EXPECT_LE(share, ref_share * (1 + 1e-15));  // rounded toward zero
    EXPECT_NEAR(share, ref_share, 1e-15 * ref_share);
  }
  EXPECT_NEAR(upper, ref_upper, rel * ref_upper) << "upper";
  EXPECT_NEAR(lower, ref_lower, rel * ref_lower + 1e-300) << "lower";
  // Outward rounding: never on the inner side of the 40-digit value (mpmath;
  // scipy's own can be a unit in the last place inside it).
  EXPECT_GE(upper, Num(row, "upper_outward")) << "upper";
  EXPECT_LE(lower, Num(row, "lower_outward")) << "lower";
}

// Source: scipy.stats.beta.isf / beta.ppf and mpmath.betainc (Clopper &
// Pearson 1934) at Bonferroni (1936) shares delta_slices / G (or
// delta_slices * w_s with weights) and Sidak (1967) shares
// 1 - (1 - delta_slices)^(1/G) (numpy, checked with mpmath at 50 digits);
// fixture slice_certify.csv. Slices only: delta_slices = delta; with a
// hold-out count beside them: delta / 2.
TEST(SliceReferenceTest, CertifyLimitsMatchScipy) {
  const std::vector<Group> groups = GroupRows(
      ReadFixture("slice_certify.csv"), {"case", "rule", "failure_probability", "slice_count"});
  ASSERT_GE(groups.size(), 20u);
  EXPECT_GE(std::count_if(groups.begin(), groups.end(),
                          [](const Group& g) { return !g.weights.empty(); }),
            12);
  for (const Group& g : groups) {
    const FixtureRow& first = g.rows.front();
    CertifyRequest r;
    r.failure_probability = Num(first, "failure_probability");
    r.slice_sharing = SharingOf(g);
    r.evidence.slices = g.slices;
    const bool with_holdout = first.at("case") == "with-holdout";
    if (with_holdout) r.evidence.holdout = SampleCounts{30, 1000};
    SCOPED_TRACE(absl::StrJoin({first.at("case"), first.at("rule"), first.at("failure_probability"),
                                first.at("slice_count")},
                               " "));
    absl::StatusOr<CertifyResult> res = Certify(r);
    ASSERT_TRUE(res.ok()) << res.status();
    ASSERT_TRUE(res->slices.has_value());
    EXPECT_EQ(res->slices->failure_probability,
              with_holdout ? r.failure_probability / 2 : r.failure_probability);
    std::map<std::string, const Certificate*> by_name;
    for (const SliceCertificate& c : res->slices->slice_certificates) {
      by_name[c.slice_name] = &c.certificate;
    }
    ASSERT_EQ(by_name.size(), g.rows.size());
    for (const FixtureRow& row : g.rows) {
      SCOPED_TRACE(row.at("slice"));
      const Certificate* c = by_name.at(row.at("slice"));
      ASSERT_TRUE(c->risk_lower_bound.has_value());
      ExpectMatches(Rule(row), c->failure_probability, c->risk_upper_bound, *c->risk_lower_bound,
                    row);
    }
  }
}

// Source: scipy.stats.beta.isf / beta.ppf and mpmath.betainc (Clopper &
// Pearson 1934) at half of each slice's Bonferroni (1936) or Sidak (1967)
// share of the gate's slices
// part (delta / 2 without a champion, delta / 3 with one); fixture
// slice_gate.csv.
TEST(SliceReferenceTest, GateLimitsMatchScipy) {
  const std::vector<Group> groups = GroupRows(
      ReadFixture("slice_gate.csv"), {"rule", "failure_probability", "champion", "slice_count"});
  ASSERT_GE(groups.size(), 20u);
  EXPECT_GE(std::count_if(groups.begin(), groups.end(),
                          [](const Group& g) { return !g.weights.empty(); }),
            12);
  for (const Group& g : groups) {
    const FixtureRow& first = g.rows.front();
    GatePolicy p;
    p.max_risk = 0.5;
    p.failure_probability = Num(first, "failure_probability");
    p.max_slice_risk = 0.5;
    p.slice_sharing = SharingOf(g);
    GateCandidate c;
    c.id = "fern-9";
    std::uint64_t k = 0, n = 0;
    for (const SliceEvidence& s : g.slices) {
      k += s.error_count;
      n += s.sample_count;
    }
    c.evidence.holdout = SampleCounts{k, n};
    c.evidence.slices = g.slices;
    std::optional<ChampionComparison> champion;
    if (first.at("champion") == "1") {
      champion = ChampionComparison{};
      champion->champion_id = "fern-8";
      champion->paired = PairedCounts{k / 4, k / 4, k - k / 4, n};
    }
    SCOPED_TRACE(absl::StrJoin({first.at("rule"), first.at("failure_probability"),
                                first.at("champion"), first.at("slice_count")},
                               " "));
    absl::StatusOr<GateDecision> d = DecideGate(p, c, champion);
    ASSERT_TRUE(d.ok()) << d.status();
    std::map<std::string, const SliceCheck*> by_name;
    for (const SliceCheck& s : d->slices) by_name[s.slice_name] = &s;
    ASSERT_EQ(by_name.size(), g.rows.size());
    for (const FixtureRow& row : g.rows) {
      SCOPED_TRACE(row.at("slice"));
      const SliceCheck* s = by_name.at(row.at("slice"));
      ExpectMatches(Rule(row), s->failure_probability, s->risk_upper_bound, s->risk_lower_bound,
                    row);
    }
  }
}

// The gate's outcome for one slice of `sizes` holding `errors` errors (the
// others none).
SliceOutcome OutcomeAt(const FixtureRow& row, const std::vector<std::uint64_t>& sizes,
                       std::size_t which, std::uint64_t errors) {
  GatePolicy p;
  p.max_risk = 0.5;
  p.failure_probability = Num(row, "failure_probability");
  p.max_slice_risk = Num(row, "max_slice_risk");
  p.slice_sharing.rule = Rule(row);
  GateCandidate c;
  c.id = "fern-9";
  std::uint64_t n = 0;
  for (std::size_t i = 0; i < sizes.size(); ++i) {
    SliceEvidence s;
    s.name = "slice-" + std::to_string(i);
    s.sample_count = sizes[i];
    s.error_count = i == which ? errors : 0;
    n += sizes[i];
    c.evidence.slices.push_back(s);
  }
  c.evidence.holdout = SampleCounts{errors, n};
  absl::StatusOr<GateDecision> d = DecideGate(p, c, std::nullopt);
  EXPECT_TRUE(d.ok()) << d.status();
  if (!d.ok()) return SliceOutcome::kUndecided;
  for (const SliceCheck& s : d->slices) {
    if (s.slice_name == "slice-" + std::to_string(which)) return s.outcome;
  }
  ADD_FAILURE() << "slice missing";
  return SliceOutcome::kUndecided;
}

// Each slice's outcome on both sides of its two boundaries.
// Source: scipy.stats.beta.isf / beta.ppf (Clopper & Pearson 1934) at half of
// each slice's Bonferroni (1936) or Sidak (1967) share of delta / 2, linear
// scan over the error count (fixture slice_gate_boundary.csv; the same scan
// as gate_risk_boundary.csv for the overall risk).
TEST(SliceReferenceTest, GateOutcomeBoundariesMatchScipy) {
  const std::vector<FixtureRow> rows = ReadFixture("slice_gate_boundary.csv");
  ASSERT_GE(rows.size(), 20u);
  // Rows come in blocks of slice_count slices of one setup.
  for (std::size_t start = 0; start < rows.size();) {
    const std::size_t g = U(rows[start], "slice_count");
    ASSERT_LE(start + g, rows.size());
    std::vector<std::uint64_t> sizes;
    for (std::size_t i = 0; i < g; ++i) sizes.push_back(U(rows[start + i], "sample_count"));
    for (std::size_t i = 0; i < g; ++i) {
      const FixtureRow& row = rows[start + i];
      const std::int64_t k_max = std::stoll(row.at("k_max_clears"));
      const std::int64_t k_min = std::stoll(row.at("k_min_exceeds"));
      SCOPED_TRACE(absl::StrJoin({row.at("rule"), row.at("failure_probability"),
                                  row.at("sample_count"), row.at("max_slice_risk")},
                                 " "));
      ASSERT_GE(k_max, 0);
      ASSERT_LT(k_max + 1, k_min);
      const auto at = [&](std::int64_t k) {
        return OutcomeAt(row, sizes, i, static_cast<std::uint64_t>(k));
      };
      EXPECT_EQ(at(k_max), SliceOutcome::kClears);
      EXPECT_EQ(at(k_max + 1), SliceOutcome::kUndecided);
      EXPECT_EQ(at(k_min - 1), SliceOutcome::kUndecided);
      EXPECT_EQ(at(k_min), SliceOutcome::kExceeds);
    }
    start += g;
  }
}

}  // namespace
}  // namespace riskbound::core
