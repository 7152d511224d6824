#include "service/core/delta_split.h"

#include <algorithm>
#include <cfloat>
#include <cmath>
#include <cstdlib>
#include <limits>

#include "absl/strings/str_format.h"

namespace riskbound::core {
namespace {

constexpr double kInf = std::numeric_limits<double>::infinity();

// Below this magnitude the residual of a product or quotient may not be a
// double (it would fall under the subnormal range): the operations step one
// double outward instead of deciding. 2^-968 = 2^-1022 * 2^54.
const double kTiny = std::ldexp(1.0, -968);

// The exact error of s = fl(a + b): a + b = s + err (Knuth's TwoSum; exact,
// subnormals included, when s is finite).
double SumError(double a, double b, double s) {
  const double bb = s - a;
  return (a - (s - bb)) + (b - bb);
}

// 6 / pi^2 = 0.607927101854026628663... rounded down to a double: the
// nearest double (shortest form 0.6079271018540267) lies above it, so this
// is the one below it, 0.6079271018540265 (tests/core/delta_split_test.cc
// checks it against binary128, the never-overspent integration test against
// pi from Machin's formula).
constexpr double kSixOverPiSquaredDown = 0.6079271018540265;

}  // namespace

double SumUp(double a, double b) {
  const double s = a + b;
  return SumError(a, b, s) > 0.0 ? std::nextafter(s, kInf) : s;
}

double SumDown(double a, double b) {
  const double s = a + b;
  return SumError(a, b, s) < 0.0 ? std::nextafter(s, -kInf) : s;
}

double ProductUp(double a, double b) {
  const double p = a * b;
  if (std::fabs(p) < kTiny) return std::nextafter(p, kInf);
  return std::fma(a, b, -p) > 0.0 ? std::nextafter(p, kInf) : p;
}

double ProductDown(double a, double b) {
  const double p = a * b;
  if (std::fabs(p) < kTiny) return std::nextafter(p, -kInf);
  return std::fma(a, b, -p) < 0.0 ? std::nextafter(p, -kInf) : p;
}

double QuotientUp(double a, double b) {
  const double q = a / b;
  if (a == 0.0) return q;
  if (std::fabs(q) < kTiny || std::fabs(a) < kTiny) return std::nextafter(q, kInf);
  // q - a/b = (q*b - a) / b: below a/b when the residual and b differ in sign.
  const double r = std::fma(q, b, -a);
  return (r != 0.0 && std::signbit(r) != std::signbit(b)) ? std::nextafter(q, kInf) : q;
}

double QuotientDown(double a, double b) {
  const double q = a / b;
  if (a == 0.0) return q;
  if (std::fabs(q) < kTiny || std::fabs(a) < kTiny) return std::nextafter(q, -kInf);
  const double r = std::fma(q, b, -a);
  return (r != 0.0 && std::signbit(r) == std::signbit(b)) ? std::nextafter(q, -kInf) : q;
}

void ExactSum::Add(double x) {
  if (!(x > 0.0)) return;  // 0 adds nothing (REQUIRES: x >= 0)
  int e = 0;
  const double f = std::frexp(x, &e);  // x = f * 2^e, f in [0.5, 1)
  std::uint64_t m = static_cast<std::uint64_t>(std::ldexp(f, 53));
  // x = m * 2^(e - 53) = m * 2^(pos - 1074).
  int pos = e - 53 + 1074;
  if (pos < 0) {
    m >>= -pos;  // a subnormal: the bits shifted out are zero
    pos = 0;
  }
  unsigned __int128 v = static_cast<unsigned __int128>(m) << (pos % 32);
  std::size_t i = static_cast<std::size_t>(pos / 32);
  std::uint64_t carry = 0;
  while ((v != 0 || carry != 0) && i < limbs_.size()) {
    const std::uint64_t t = static_cast<std::uint64_t>(limbs_[i]) +
                            static_cast<std::uint64_t>(v & 0xffffffffu) + carry;
    limbs_[i] = static_cast<std::uint32_t>(t);
    carry = t >> 32;
    v >>= 32;
    ++i;
  }
}

double ExactSum::RoundedUp() const {
  int top = -1;  // highest set bit, counted from 2^-1074
  for (int i = static_cast<int>(limbs_.size()) - 1; i >= 0 && top < 0; --i) {
    if (limbs_[i] != 0) top = i * 32 + (31 - __builtin_clz(limbs_[i]));
  }
  if (top < 0) return 0.0;
  const auto bit = [&](int b) { return (limbs_[b / 32] >> (b % 32)) & 1u; };
  const int low = top >= 52 ? top - 52 : 0;
  std::uint64_t mantissa = 0;
  for (int b = top; b >= low; --b) mantissa = (mantissa << 1) | bit(b);
  bool sticky = false;
  for (int b = low - 1; b >= 0 && !sticky; --b) {
    if (b % 32 == 31 && limbs_[b / 32] == 0) {
      b -= 31;  // a whole zero limb
      continue;
    }
    sticky = bit(b) != 0;
  }
  if (sticky) ++mantissa;  // at most 2^53: still exact
  return std::ldexp(static_cast<double>(mantissa), low - 1074);
}

double SpentOf(const std::vector<double>& shares) {
  ExactSum sum;
  for (double s : shares) sum.Add(s);
  return sum.RoundedUp();
}

double EqualShare(double total, std::size_t k) {
  if (k <= 1) return total;
  return std::max(0.0, QuotientDown(total, static_cast<double>(k)));
}

double WeightedShare(double total, double weight) {
  if (weight == 1.0) return total;
  return std::max(0.0, ProductDown(total, weight));
}

double InverseSquareWeight(std::size_t position) {
  const double k = static_cast<double>(position);
  return std::max(0.0, QuotientDown(QuotientDown(kSixOverPiSquaredDown, k), k));
}

bool WeightsSumAtMostOne(const std::vector<double>& weights) {
  ExactSum sum;
  for (double w : weights) sum.Add(w);
  return sum.AtMost(1.0);
}

std::string WeightSumMessage(const std::vector<double>& weights, const std::string& item) {
  std::string message = absl::StrFormat(
      "weights must sum to at most 1, exactly as the doubles given (else the failure "
      "probability would be overspent), got %.17g",
      SpentOf(weights));
  if (weights.empty() || item.empty()) return message;
  ExactSum others;
  for (std::size_t i = 0; i + 1 < weights.size(); ++i) others.Add(weights[i]);
  const double rest = SumDown(1.0, -others.RoundedUp());
  if (rest > 0.0) {
    absl::StrAppendFormat(&message, "; for example %s[%d] = %.17g keeps it at most 1", item,
                          weights.size() - 1, rest);
  }
  return message;
}

std::string FailureProbabilityText(double p) {
  if (!(p > 0.0)) return "0";
  std::string text = absl::StrFormat("%.6g", p);
  if (std::strtod(text.c_str(), nullptr) >= p) return text;
  // Rounded down: the next six-digit decimal up, d.ddddd + 0.00001.
  const std::string sci = absl::StrFormat("%.5e", p);  // "d.ddddde+XX"
  const std::size_t e_at = sci.find('e');
  long digits = std::strtol(sci.substr(0, 1).c_str(), nullptr, 10) * 100000 +
                std::strtol(sci.substr(2, e_at - 2).c_str(), nullptr, 10);
  int exponent = static_cast<int>(std::strtol(sci.c_str() + e_at + 1, nullptr, 10));
  ++digits;
  if (digits >= 1000000) {
    digits /= 10;
    ++exponent;
  }
  const std::string up = absl::StrFormat("%de%d", digits, exponent - 5);
  text = absl::StrFormat("%.6g", std::strtod(up.c_str(), nullptr));
  if (std::strtod(text.c_str(), nullptr) >= p) return text;
  return up;
}

}  // namespace riskbound::core
