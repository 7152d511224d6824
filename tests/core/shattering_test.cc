// Brute-force shattering: the catalogue's VC dimensions checked against
// computation, not against our formulas. Each check decides, exactly, whether
// a class realizes every labeling of a point set:
//  - halfspaces and polynomial thresholds: exact linear feasibility of
//    y_i (w . phi(x_i)) >= 1 by Fourier-Motzkin elimination in 128-bit
//    integer arithmetic (integer coordinates, no rounding anywhere);
//  - axis-aligned boxes: a labeling is realizable iff the bounding box of
//    the positives contains no negative (exact comparisons);
//  - unions of k intervals: every union of k index intervals enumerated;
//  - decision stumps: every tuple of feature orderings enumerated.
// Random point sets come from std::mt19937_64 with fixed seeds.
#include <algorithm>
#include <array>
#include <cstdint>
#include <numeric>
#include <random>
#include <set>
#include <vector>

#include "gtest/gtest.h"
#include "service/core/capacity.h"
#include "service/core/vc.h"

namespace riskbound::core {
namespace {

using i128 = __int128;
using Point = std::vector<std::int64_t>;

double Vc(const ModelDescription& m) {
  absl::StatusOr<CapacityEstimate> e = EstimateCapacity(m);
  EXPECT_TRUE(e.ok()) << e.status();
  return e.ok() ? e->vc_dimension : -1.0;
}

// ---------------------------------------------------------------------------
// Exact linear feasibility by Fourier-Motzkin elimination.

i128 Abs(i128 x) { return x < 0 ? -x : x; }

i128 Gcd(i128 a, i128 b) {
  a = Abs(a);
  b = Abs(b);
  while (b != 0) {
    const i128 t = a % b;
    a = b;
    b = t;
  }
  return a;
}

struct Inequality {
  std::vector<i128> a;  // a . v >= b
  i128 b = 0;
};

// Outcome of the elimination; kOverflow fails the calling test rather than
// answering wrongly.
enum class Feasibility { kFeasible, kInfeasible, kOverflow };

Feasibility FourierMotzkin(std::vector<Inequality> rows, std::size_t vars) {
  constexpr i128 kLimit = static_cast<i128>(1) << 60;  // products stay < 2^121
  for (std::size_t k = 0; k < vars; ++k) {
    std::vector<Inequality> pos, neg, next;
    for (Inequality& r : rows) {
      if (r.a[k] > 0) {
        pos.push_back(std::move(r));
      } else if (r.a[k] < 0) {
        neg.push_back(std::move(r));
      } else {
        next.push_back(std::move(r));
      }
    }
    for (const Inequality& p : pos) {
      for (const Inequality& q : neg) {
        // (-q_k) p + p_k q: both multipliers positive, variable k cancels.
        const i128 mp = -q.a[k];
        const i128 mq = p.a[k];
        Inequality c;
        c.a.resize(vars);
        for (std::size_t j = 0; j < vars; ++j) {
          if (Abs(p.a[j]) >= kLimit || Abs(q.a[j]) >= kLimit || mp >= kLimit || mq >= kLimit) {
            return Feasibility::kOverflow;
          }
          c.a[j] = mp * p.a[j] + mq * q.a[j];
        }
        if (Abs(p.b) >= kLimit || Abs(q.b) >= kLimit) return Feasibility::kOverflow;
        c.b = mp * p.b + mq * q.b;
        // Divide by the gcd of all coefficients and the right-hand side (a
        // positive factor: same solution set over the reals).
        i128 g = Abs(c.b);
        for (i128 x : c.a) g = Gcd(g, x);
        if (g > 1) {
          for (i128& x : c.a) x /= g;
          c.b /= g;
        }
        next.push_back(std::move(c));
      }
    }
    rows = std::move(next);
  }
  // Only 0 >= b remains.
  for (const Inequality& r : rows) {
    if (r.b > 0) return Feasibility::kInfeasible;
  }
  return Feasibility::kFeasible;
}

// Is there w with sign(w . f_i) = y_i for all i (strictly)? Scaling makes
// this y_i (w . f_i) >= 1. A non-strict class ({w.f >= 0}) realizes the same
// labelings of a finite set: shift the offset by less than the smallest
// negative margin.
Feasibility Separable(const std::vector<Point>& features, unsigned labels) {
  std::vector<Inequality> rows;
  for (std::size_t i = 0; i < features.size(); ++i) {
    const i128 y = ((labels >> i) & 1u) ? 1 : -1;
    Inequality r;
    for (std::int64_t f : features[i]) r.a.push_back(y * f);
    r.b = 1;
    rows.push_back(std::move(r));
  }
  return FourierMotzkin(std::move(rows), features[0].size());
}

// Every labeling of the points realized by sign(w . f)?
bool LinearlyShattered(const std::vector<Point>& features) {
  for (unsigned labels = 0; labels < (1u << features.size()); ++labels) {
    const Feasibility f = Separable(features, labels);
    EXPECT_NE(f, Feasibility::kOverflow) << "Fourier-Motzkin coefficients overflowed";
    if (f != Feasibility::kFeasible) return false;
  }
  return true;
}

// Halfspaces with bias: features (x, 1).
std::vector<Point> WithBias(std::vector<Point> points) {
  for (Point& p : points) p.push_back(1);
  return points;
}

std::vector<Point> RandomIntegerPoints(std::mt19937_64& rng, std::size_t n, std::size_t dim) {
  std::uniform_int_distribution<std::int64_t> coord(-20, 20);
  std::vector<Point> pts(n, Point(dim));
  for (Point& p : pts) {
    for (std::int64_t& x : p) x = coord(rng);
  }
  return pts;
}

// Twice the signed area / six times the signed volume, exact.
i128 Orientation2(const Point& a, const Point& b, const Point& c) {
  return static_cast<i128>(b[0] - a[0]) * (c[1] - a[1]) -
         static_cast<i128>(b[1] - a[1]) * (c[0] - a[0]);
}
i128 Orientation3(const Point& a, const Point& b, const Point& c, const Point& d) {
  const i128 u[3] = {b[0] - a[0], b[1] - a[1], b[2] - a[2]};
  const i128 v[3] = {c[0] - a[0], c[1] - a[1], c[2] - a[2]};
  const i128 w[3] = {d[0] - a[0], d[1] - a[1], d[2] - a[2]};
  return u[0] * (v[1] * w[2] - v[2] * w[1]) - u[1] * (v[0] * w[2] - v[2] * w[0]) +
         u[2] * (v[0] * w[1] - v[1] * w[0]);
}

// The elimination itself, on cases decided by hand: XOR is not linearly
// separable in the plane, AND is.
TEST(FourierMotzkinTest, KnownCases) {
  const std::vector<Point> square = WithBias({{0, 0}, {1, 0}, {0, 1}, {1, 1}});
  EXPECT_EQ(Separable(square, 0b0110), Feasibility::kInfeasible);  // XOR
  EXPECT_EQ(Separable(square, 0b1000), Feasibility::kFeasible);    // AND
  EXPECT_EQ(Separable(square, 0b0101), Feasibility::kFeasible);    // x_1 = 0 side
  // Collinear 0, 1, 2 on a line: the middle point alone is not separable.
  const std::vector<Point> line = WithBias({{0, 0}, {1, 1}, {2, 2}});
  EXPECT_EQ(Separable(line, 0b010), Feasibility::kInfeasible);
  EXPECT_EQ(Separable(line, 0b100), Feasibility::kFeasible);
}

// Source: brute force (exact LP feasibility). Halfspaces in the plane shatter
// a triangle and every non-collinear random triple, and no random 4-point set.
TEST(ShatteringTest, HalfspacesInThePlane) {
  ModelDescription m;
  m.kind = ModelKind::kHalfspace;
  m.dimension = 2;
  ASSERT_EQ(Vc(m), 3.0);
  EXPECT_TRUE(LinearlyShattered(WithBias({{0, 0}, {1, 0}, {0, 1}})));
  std::mt19937_64 rng(20240601);
  int triples = 0;
  for (int t = 0; t < 60; ++t) {
    std::vector<Point> p = RandomIntegerPoints(rng, 3, 2);
    if (Orientation2(p[0], p[1], p[2]) == 0) continue;  // collinear: not generic
    ++triples;
    EXPECT_TRUE(LinearlyShattered(WithBias(p))) << "triple " << t;
  }
  EXPECT_GE(triples, 50);
  for (int t = 0; t < 200; ++t) {
    EXPECT_FALSE(LinearlyShattered(WithBias(RandomIntegerPoints(rng, 4, 2)))) << "set " << t;
  }
}

// Source: brute force. Homogeneous halfspaces in the plane (no bias): d = 2.
TEST(ShatteringTest, HomogeneousHalfspacesInThePlane) {
  ModelDescription m;
  m.kind = ModelKind::kHalfspace;
  m.dimension = 2;
  m.with_bias = false;
  ASSERT_EQ(Vc(m), 2.0);
  EXPECT_TRUE(LinearlyShattered({{1, 0}, {0, 1}}));
  std::mt19937_64 rng(7);
  for (int t = 0; t < 100; ++t) {
    EXPECT_FALSE(LinearlyShattered(RandomIntegerPoints(rng, 3, 2))) << "set " << t;
  }
}

// Source: brute force. Halfspaces in R^3 shatter the unit tetrahedron and
// every non-coplanar random 4-point set, and no random 5-point set (Radon).
TEST(ShatteringTest, HalfspacesInThreeDimensions) {
  ModelDescription m;
  m.kind = ModelKind::kHalfspace;
  m.dimension = 3;
  ASSERT_EQ(Vc(m), 4.0);
  EXPECT_TRUE(LinearlyShattered(WithBias({{0, 0, 0}, {1, 0, 0}, {0, 1, 0}, {0, 0, 1}})));
  std::mt19937_64 rng(31337);
  int quads = 0;
  for (int t = 0; t < 30; ++t) {
    std::vector<Point> p = RandomIntegerPoints(rng, 4, 3);
    if (Orientation3(p[0], p[1], p[2], p[3]) == 0) continue;
    ++quads;
    EXPECT_TRUE(LinearlyShattered(WithBias(p))) << "set " << t;
  }
  EXPECT_GE(quads, 25);
  for (int t = 0; t < 60; ++t) {
    EXPECT_FALSE(LinearlyShattered(WithBias(RandomIntegerPoints(rng, 5, 3)))) << "set " << t;
  }
}

// Polynomial features (1, x, ..., x^p) of integer points on the line.
std::vector<Point> Monomials(const std::vector<std::int64_t>& xs, int degree) {
  std::vector<Point> out;
  for (std::int64_t x : xs) {
    Point f;
    std::int64_t power = 1;
    for (int j = 0; j <= degree; ++j) {
      f.push_back(power);
      power *= x;
    }
    out.push_back(f);
  }
  return out;
}

// Source: brute force. Polynomial thresholds of degree p on the line: C(1+p,
// p) = p + 1 points shattered, p + 2 never (any p + 2 distinct points).
TEST(ShatteringTest, PolynomialThresholdsOnTheLine) {
  std::mt19937_64 rng(99);
  for (int p : {2, 3}) {
    ModelDescription m;
    m.kind = ModelKind::kPolynomialThreshold;
    m.dimension = 1;
    m.degree = static_cast<std::uint64_t>(p);
    ASSERT_EQ(Vc(m), p + 1.0);
    std::vector<std::int64_t> xs(static_cast<std::size_t>(p + 1));
    std::iota(xs.begin(), xs.end(), 0);
    EXPECT_TRUE(LinearlyShattered(Monomials(xs, p))) << "p=" << p;
    for (int t = 0; t < 20; ++t) {
      // p + 2 distinct integers in [-4, 4].
      std::vector<std::int64_t> pool = {-4, -3, -2, -1, 0, 1, 2, 3, 4};
      std::shuffle(pool.begin(), pool.end(), rng);
      pool.resize(static_cast<std::size_t>(p + 2));
      EXPECT_FALSE(LinearlyShattered(Monomials(pool, p))) << "p=" << p << " set " << t;
    }
  }
}

// ---------------------------------------------------------------------------
// Axis-aligned boxes.

// A labeling is realized by a closed box iff the bounding box of its
// positives contains no negative (the empty labeling: a box away from all).
bool BoxesShatter(const std::vector<std::vector<double>>& pts) {
  const std::size_t n = pts.size();
  const std::size_t dim = pts[0].size();
  for (unsigned labels = 1; labels < (1u << n); ++labels) {
    std::vector<double> lo(dim, 1e300), hi(dim, -1e300);
    for (std::size_t i = 0; i < n; ++i) {
      if (!((labels >> i) & 1u)) continue;
      for (std::size_t j = 0; j < dim; ++j) {
        lo[j] = std::min(lo[j], pts[i][j]);
        hi[j] = std::max(hi[j], pts[i][j]);
      }
    }
    for (std::size_t i = 0; i < n; ++i) {
      if ((labels >> i) & 1u) continue;
      bool inside = true;
      for (std::size_t j = 0; j < dim; ++j) inside &= lo[j] <= pts[i][j] && pts[i][j] <= hi[j];
      if (inside) return false;
    }
  }
  return true;
}

// Source: brute force; Shalev-Shwartz & Ben-David (2014) Ch. 6 (the diamond).
TEST(ShatteringTest, AxisAlignedBoxes) {
  ModelDescription m;
  m.kind = ModelKind::kAxisAlignedBoxes;
  m.dimension = 2;
  ASSERT_EQ(Vc(m), 4.0);
  EXPECT_TRUE(BoxesShatter({{0, 1}, {1, 0}, {0, -1}, {-1, 0}}));
  std::mt19937_64 rng(5);
  std::uniform_real_distribution<double> u(0.0, 1.0);
  for (int t = 0; t < 300; ++t) {
    std::vector<std::vector<double>> pts(5, std::vector<double>(2));
    for (auto& p : pts) {
      for (double& x : p) x = u(rng);
    }
    EXPECT_FALSE(BoxesShatter(pts)) << "set " << t;
  }
  // R^3: the octahedron's 6 vertices are shattered, no random 7-point set is.
  m.dimension = 3;
  ASSERT_EQ(Vc(m), 6.0);
  EXPECT_TRUE(BoxesShatter(
      {{1, 0, 0}, {-1, 0, 0}, {0, 1, 0}, {0, -1, 0}, {0, 0, 1}, {0, 0, -1}}));
  for (int t = 0; t < 100; ++t) {
    std::vector<std::vector<double>> pts(7, std::vector<double>(3));
    for (auto& p : pts) {
      for (double& x : p) x = u(rng);
    }
    EXPECT_FALSE(BoxesShatter(pts)) << "set " << t;
  }
}

// ---------------------------------------------------------------------------
// Unions of intervals on the line.

// All labelings of m ordered points realized by unions of k intervals: each
// interval is an index range [a, b) with 0 <= a <= b <= m (a = b: empty),
// which is every way an interval can meet m points on a line.
std::set<std::uint64_t> UnionLabelings(int k, int m) {
  std::vector<std::uint64_t> single;
  for (int a = 0; a <= m; ++a) {
    for (int b = a; b <= m; ++b) {
      std::uint64_t mask = 0;
      for (int i = a; i < b; ++i) mask |= 1ULL << i;
      single.push_back(mask);
    }
  }
  std::set<std::uint64_t> out = {0};
  for (int j = 0; j < k; ++j) {
    std::set<std::uint64_t> next;
    for (std::uint64_t acc : out) {
      for (std::uint64_t s : single) next.insert(acc | s);
    }
    out = std::move(next);
  }
  return out;
}

// Source: brute force. One interval shatters 2 points not 3; k intervals
// shatter 2k points, not 2k + 1.
TEST(ShatteringTest, IntervalsAndUnions) {
  ModelDescription interval;
  interval.kind = ModelKind::kInterval;
  ASSERT_EQ(Vc(interval), 2.0);
  EXPECT_EQ(UnionLabelings(1, 2).size(), 4u);
  EXPECT_LT(UnionLabelings(1, 3).size(), 8u);
  for (int k = 1; k <= 3; ++k) {
    ModelDescription m;
    m.kind = ModelKind::kUnionOfIntervals;
    m.interval_count = static_cast<std::uint64_t>(k);
    const double h = Vc(m);
    ASSERT_EQ(h, 2.0 * k);
    EXPECT_EQ(UnionLabelings(k, 2 * k).size(), 1u << (2 * k)) << "k=" << k;
    EXPECT_LT(UnionLabelings(k, 2 * k + 1).size(), 1u << (2 * k + 1)) << "k=" << k;
  }
}

// Source: brute force, and Sauer (1972) / Shelah (1972): intervals realize
// exactly 56 labelings of 10 points = sum_{i<=2} C(10, i), so the
// Sauer-Shelah bound is tight there. Unions of 2 intervals (h = 4) stay below
// it, and below the closed form the VC families use (vc.h
// VcLogGrowthBound(h, x) bounds the growth function at 2x points).
TEST(ShatteringTest, SauerShelahAgainstEnumeratedGrowth) {
  const std::size_t intervals = UnionLabelings(1, 10).size();
  EXPECT_EQ(intervals, 56u);
  EXPECT_EQ(intervals, 1u + 10u + 45u);  // C(10,0) + C(10,1) + C(10,2)
  EXPECT_LE(std::log(static_cast<double>(intervals)), VcLogGrowthBound(2, 5.0));
  for (int m = 1; m <= 12; ++m) {
    const double growth = static_cast<double>(UnionLabelings(2, m).size());
    // sum_{i <= 4} C(m, i), counted exactly.
    std::uint64_t sauer = 0;
    std::uint64_t c = 1;
    for (int i = 0; i <= std::min(4, m); ++i) {
      if (i > 0) c = c * static_cast<std::uint64_t>(m - i + 1) / static_cast<std::uint64_t>(i);
      sauer += c;
    }
    EXPECT_LE(growth, static_cast<double>(sauer)) << "m=" << m;
    EXPECT_LE(std::log(growth), VcLogGrowthBound(4, m / 2.0) + 1e-12) << "m=" << m;
    if (m <= 4) {
      EXPECT_EQ(growth, std::ldexp(1.0, m));  // shattered up to 2k = 4
    }
  }
}

// ---------------------------------------------------------------------------
// Decision stumps: on m points, feature j induces an ordering; a stump
// labels a suffix (or, with the other polarity, a prefix) of it positive.
// Ties on a feature only merge positions and lose labelings, so strict
// orderings give the maximum. Feature 1's ordering is the identity WLOG.
int StumpVcBruteForce(int features) {
  int vc = 0;
  for (int m = 1; m <= 7; ++m) {
    std::vector<int> identity(static_cast<std::size_t>(m));
    std::iota(identity.begin(), identity.end(), 0);
    std::vector<std::vector<int>> perms;
    std::vector<int> p = identity;
    do {
      perms.push_back(p);
    } while (std::next_permutation(p.begin(), p.end()));
    const unsigned full = (1u << m) - 1;
    bool found = false;
    // Odometer over (features - 1) orderings.
    std::vector<std::size_t> idx(static_cast<std::size_t>(features - 1), 0);
    while (!found) {
      std::vector<bool> seen(full + 1, false);
      std::size_t count = 0;
      auto add = [&](const std::vector<int>& order) {
        for (int s = 0; s <= m; ++s) {
          unsigned mask = 0;
          for (int pos = s; pos < m; ++pos) mask |= 1u << order[static_cast<std::size_t>(pos)];
          for (unsigned lab : {mask, full ^ mask}) {
            if (!seen[lab]) {
              seen[lab] = true;
              ++count;
            }
          }
        }
      };
      add(identity);
      for (std::size_t i : idx) add(perms[i]);
      if (count == full + 1u) found = true;
      std::size_t j = 0;
      while (j < idx.size() && ++idx[j] == perms.size()) idx[j++] = 0;
      if (j == idx.size()) break;
    }
    if (!found) break;
    vc = m;
  }
  return vc;
}

// Source: brute force over feature orderings (Leboeuf, LeBlanc & Marchand
// 2020 give the same: l = 1, 2, 3 -> 2, 3, 4).
TEST(ShatteringTest, DecisionStumps) {
  for (int l = 1; l <= 3; ++l) {
    ModelDescription m;
    m.kind = ModelKind::kDecisionStump;
    m.feature_count = static_cast<std::uint64_t>(l);
    EXPECT_EQ(Vc(m), static_cast<double>(StumpVcBruteForce(l))) << "l=" << l;
  }
  EXPECT_EQ(StumpVcBruteForce(1), 2);
  EXPECT_EQ(StumpVcBruteForce(2), 3);
  EXPECT_EQ(StumpVcBruteForce(3), 4);
}

}  // namespace
}  // namespace riskbound::core
