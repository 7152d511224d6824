// Splitting a failure probability between several bounds (the union bound of
// Certify over families, SelectStructure over candidates, the gate over its
// tests) so that what is reported never claims more than was proven, not even
// by rounding: every share is rounded toward zero, so the exact (rational) sum
// of the shares an answer reports is at most the failure probability the
// caller asked for, and the spent failure probability reported is that exact
// sum rounded up (hence also at most the request).
//
// Also the few directed-rounding operations on doubles the bound code needs
// to round a result outward: each returns the nearest double on the stated
// side of the exact result of one operation. They decide the side exactly
// from the rounding error of the operation (the product or quotient residual
// by a fused multiply-add, the sum's error by Knuth's TwoSum), which is
// itself an exact double when nothing underflows; where the operands are so
// small that it might not be (results below 2^-968), they step one double
// outward without deciding, which is still on the stated side.
// Source: Knuth, TAOCP vol. 2 (1969), section 4.2.2, Theorem B (TwoSum);
// Boldo & Muller (2011), "Exact and approximated error of the FMA" (the
// residual of a product is a double); IEEE 754-2008 section 5.4.1 (fma).
//
// Pure functions; thread-safe.
#ifndef RISKBOUND_SERVICE_CORE_DELTA_SPLIT_H_
#define RISKBOUND_SERVICE_CORE_DELTA_SPLIT_H_

#include <array>
#include <cstddef>
#include <cstdint>
#include <string>
#include <vector>

namespace riskbound::core {

// Directed rounding of one operation. REQUIRES: finite operands, a finite
// exact result (and b != 0 for the quotients).
double SumUp(double a, double b);         // smallest double >= a + b
double SumDown(double a, double b);       // largest double <= a + b
double ProductUp(double a, double b);     // smallest double >= a * b
double ProductDown(double a, double b);   // largest double <= a * b
double QuotientUp(double a, double b);    // smallest double >= a / b
double QuotientDown(double a, double b);  // largest double <= a / b

// ExactSum
// The exact sum of non-negative finite doubles (a fixed-point accumulator
// from 2^-1074, the smallest subnormal, to 2^1024 with room for 2^64 terms):
// no rounding at all until RoundedUp.
class ExactSum {
 public:
  // REQUIRES: x finite and >= 0.
  void Add(double x);
  // The smallest double >= the exact sum (+infinity past the largest double).
  double RoundedUp() const;
  // True when the exact sum is <= bound.
  bool AtMost(double bound) const { return RoundedUp() <= bound; }

 private:
  // Little-endian 32-bit limbs of sum / 2^-1074.
  std::array<std::uint32_t, 70> limbs_{};
};

// SpentOf
// The exact sum of `shares` rounded up: the spent failure probability to
// report for bounds computed at these shares.
double SpentOf(const std::vector<double>& shares);

// EqualShare
// The largest double <= total / k: each of k equal shares of `total`
// (total itself when k = 1). REQUIRES: total >= 0, k >= 1.
double EqualShare(double total, std::size_t k);

// WeightedShare
// The largest double <= total * weight. REQUIRES: total, weight >= 0.
double WeightedShare(double total, double weight);

// InverseSquareWeight
// A double w_k <= 6 / (pi^2 k^2), within a few units in the last place of
// it, for the 1-based position k. Since sum_k 1/k^2 = pi^2/6 (Euler's Basel
// sum), the exact sum of these weights over any positions is < 1.
// REQUIRES: 1 <= position <= 2^53 (exact as a double).
double InverseSquareWeight(std::size_t position);

// WeightsSumAtMostOne
// True when the exact (rational) sum of `weights` is <= 1.
// REQUIRES: every weight finite and >= 0.
bool WeightsSumAtMostOne(const std::vector<double>& weights);

// WeightSumMessage
// The message of the violation for weights whose exact sum exceeds 1: the
// sum (rounded up) and, when one exists, a last weight that would keep the
// sum at most 1 (weights such as [0.2, 0.8] are not exact doubles: the
// doubles nearest them add up to 1 + 5.6e-17). `item` names the list's
// entries for the hint ("weights", "listed.delta_weights"); empty: no hint.
// REQUIRES: !WeightsSumAtMostOne(weights).
std::string WeightSumMessage(const std::vector<double>& weights, const std::string& item);

// FailureProbabilityText
// `p` (a spent failure probability) for a sentence: six significant digits,
// rounded up, so "holds with probability >= 1 - <text>" stays true.
// REQUIRES: p finite and >= 0.
std::string FailureProbabilityText(double p);

}  // namespace riskbound::core

#endif  // RISKBOUND_SERVICE_CORE_DELTA_SPLIT_H_
