// The CLI's one number formatter rounds outward: upper bounds up, lower
// bounds and confidence levels down, failure probabilities up.
#include "client_cli/format.h"

#include <cmath>
#include <cstdlib>
#include <random>
#include <string>

#include "gtest/gtest.h"

namespace riskbound::cli {
namespace {

TEST(FormatTest, ClopperPearsonZeroErrorsRoundsOutward) {
  // Source: Clopper & Pearson 1934, closed form for k = 0:
  // 1 - 0.05^(1/1500) = 0.0019951618622789857 (scipy.stats.beta.ppf(0.95, 1, 1500)
  // gives 0.0019951618622789853, through /usr/bin/python3).
  EXPECT_EQ(FormatUpper(0.0019951618622789857), "0.001996");
  EXPECT_EQ(FormatLower(0.0019951618622789857), "0.001995");
  EXPECT_EQ(FormatObserved(0.0019951618622789857), "0.001995");
}

TEST(FormatTest, BothSidesOfTheSixthDecimal) {
  // Exactly on the boundary: nothing to round.
  EXPECT_EQ(FormatUpper(0.001995), "0.001995");
  EXPECT_EQ(FormatLower(0.001995), "0.001995");
  // One double above (0.0019950000000000002) and below (0.0019949999999999994).
  const double above = std::nextafter(0.001995, 1.0);
  const double below = std::nextafter(0.001995, 0.0);
  EXPECT_EQ(FormatUpper(above), "0.001996");
  EXPECT_EQ(FormatLower(above), "0.001995");
  EXPECT_EQ(FormatUpper(below), "0.001995");
  EXPECT_EQ(FormatLower(below), "0.001994");
  // A carry through every digit.
  EXPECT_EQ(FormatUpper(0.9999995), "1.000000");
  EXPECT_EQ(FormatLower(0.9999995), "0.999999");
  EXPECT_EQ(FormatUpper(0.0999999999), "0.100000");
  EXPECT_EQ(FormatUpper(0.0), "0.000000");
  EXPECT_EQ(FormatLower(0.0), "0.000000");
  EXPECT_EQ(FormatUpper(1.0), "1.000000");
}

TEST(FormatTest, TinyValuesKeepFourSignificantDigits) {
  EXPECT_EQ(FormatUpper(1.2345e-7), "1.235e-07");
  EXPECT_EQ(FormatLower(1.2345e-7), "1.234e-07");
  EXPECT_EQ(FormatUpper(1e-7), "1.000e-07");
  EXPECT_EQ(FormatLower(1e-7), "1.000e-07");
  EXPECT_EQ(FormatUpper(9.9999e-7), "1.000e-06");
  EXPECT_EQ(FormatLower(9.9999e-7), "9.999e-07");
}

TEST(FormatTest, SignedDifferences) {
  // The gate's regression bounds (values from the audit quoted in issue 12).
  EXPECT_EQ(FormatSignedUpper(0.0026634313), "+0.002664");
  EXPECT_EQ(FormatSignedLower(0.0026634313), "+0.002663");
  EXPECT_EQ(FormatSignedUpper(-0.0026634313), "-0.002663");
  EXPECT_EQ(FormatSignedLower(-0.0026634313), "-0.002664");
  EXPECT_EQ(FormatLower(0.0403600751), "0.040360");
  EXPECT_EQ(FormatUpper(0.0403600751), "0.040361");
}

TEST(FormatTest, FailureProbabilitiesRoundUp) {
  EXPECT_EQ(FormatFailureProbability(0.05), "0.05");
  EXPECT_EQ(FormatFailureProbability(0.05 / 3), "0.01667");       // 0.016666...
  EXPECT_EQ(FormatFailureProbability(0.0125), "0.0125");
  EXPECT_EQ(FormatFailureProbability(1.0000000000000003e-09), "1.001e-09");
  EXPECT_EQ(FormatFailureProbability(1e-9), "1e-09");
  EXPECT_EQ(FormatFailureProbability(0.05 / 4), "0.0125");
}

TEST(FormatTest, ConfidenceRoundsDownAndNeverReadsOne) {
  EXPECT_EQ(FormatConfidence(0.05), "0.95");
  EXPECT_EQ(FormatConfidence(0.05 / 3), "0.9833");         // 1 - 0.0167
  EXPECT_EQ(FormatConfidence(0.0123456), "0.9876");        // 1 - 0.0124
  EXPECT_EQ(FormatConfidence(1e-9), "0.999999999");
  // A delta overspent by rounding reads below 1 - 1e-9, never above it.
  EXPECT_EQ(FormatConfidence(1.0000000000000003e-09), "0.99999999899");
  EXPECT_EQ(FormatConfidence(1e-12), "1 - 1e-12");
  EXPECT_EQ(FormatConfidence(1e-300), "1 - 1e-300");
  EXPECT_EQ(FormatConfidence(4.9e-324), "1 - 5e-324");  // shortest decimal of the least double
  EXPECT_EQ(FormatConfidence(0.999), "0.001");
  EXPECT_EQ(FormatConfidence(0.9999), "0");  // 0.9999 rounds up to 1.00: nothing left
  EXPECT_EQ(FormatConfidence(0.0), "1");     // nothing spent
}

TEST(FormatTest, SignificantAndFixed) {
  EXPECT_EQ(FormatSignificant(0.123456, 3, Rounding::kUp), "0.124");
  EXPECT_EQ(FormatSignificant(0.123456, 3, Rounding::kDown), "0.123");
  EXPECT_EQ(FormatSignificant(-0.123456, 3, Rounding::kUp), "-0.123");
  EXPECT_EQ(FormatSignificant(-0.123456, 3, Rounding::kDown), "-0.124");
  EXPECT_EQ(FormatSignificant(999.96, 4, Rounding::kUp), "1000");
  EXPECT_EQ(FormatSignificant(1234567.0, 3, Rounding::kUp), "1.24e+06");
  EXPECT_EQ(FormatFixed(0.80111, 4, Rounding::kDown), "0.8011");
  EXPECT_EQ(FormatFixed(0.80111, 4, Rounding::kUp), "0.8012");
  EXPECT_EQ(FormatFixed(2.5, 0, Rounding::kNearest), "3");
  EXPECT_EQ(ShortestDecimal(0.1), "0.1");
  EXPECT_EQ(ShortestDecimal(1e-9), "1e-09");
  EXPECT_EQ(ShortestDecimal(0.0019951618622789857), "0.0019951618622789857");
}

TEST(FormatTest, RandomValuesAreBracketedBruteForce) {
  // Brute force: strtod is monotone and reads the shortest decimal back as x,
  // so an upward-rounded text must read back >= x and a downward one <= x;
  // and the two differ by at most one unit in the sixth decimal.
  std::mt19937_64 rng(20261202);
  std::uniform_real_distribution<double> unit(0.0, 1.0);
  for (int i = 0; i < 20000; ++i) {
    const double x = i % 4 == 0 ? std::ldexp(unit(rng), -(i % 60)) : unit(rng);
    const std::string up = FormatUpper(x);
    const std::string down = FormatLower(x);
    const double u = std::strtod(up.c_str(), nullptr);
    const double d = std::strtod(down.c_str(), nullptr);
    ASSERT_GE(u, x) << x << " " << up;
    ASSERT_LE(d, x) << x << " " << down;
    if (x >= 1e-6) ASSERT_LE(u - d, 1.0000001e-6) << x;
    const std::string c = FormatConfidence(x);
    if (c.rfind("1 - ", 0) != 0) {
      ASSERT_LE(std::strtod(c.c_str(), nullptr), 1.0 - x + 1e-16) << x << " " << c;
      ASSERT_NE(c, "1");
    }
  }
}

}  // namespace
}  // namespace riskbound::cli
