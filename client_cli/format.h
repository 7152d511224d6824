// Numbers for people, rounded outward: every printed figure claims at most
// what was proven.
//
// The decimal a double stands for is its shortest round-trip form: the
// digits a user typed (--failure-probability 0.05 is 0.05, not the binary
// 0.05000000000000000277) and the digits the server's JSON carries. That
// decimal is then rounded in the safe direction:
//   - upper bounds (risk, penalty, regression, p-values, failure
//     probabilities and deltas spent) round UP;
//   - lower bounds, confidence levels and planned pass probabilities round
//     DOWN;
//   - plain observed values (an empirical error rate) round to nearest.
// A confidence level never prints as 1 or 100%: 1 - delta is shown as the
// exact decimal of 1 - (delta rounded up), "0.999999999" for delta = 1e-9,
// or as "1 - 1e-12" when delta is below 1e-9.
#ifndef RISKBOUND_CLIENT_CLI_FORMAT_H_
#define RISKBOUND_CLIENT_CLI_FORMAT_H_

#include <string>

namespace riskbound::cli {

enum class Rounding { kUp, kDown, kNearest };

// ShortestDecimal
// The shortest decimal that reads back as `x` ("0.05", "1e-09",
// "0.0019951618622789857"); "inf", "-inf" or "nan" for those.
std::string ShortestDecimal(double x);

// FormatFixed
// `x` with exactly `decimals` digits after the point (0 to 30), rounded in
// direction `r` (kUp: the printed value is >= x; kDown: <= x).
std::string FormatFixed(double x, int decimals, Rounding r);

// FormatSignificant
// `x` with at most `digits` significant digits (1 to 17), rounded in
// direction `r`, trailing zeros dropped; plain decimals for magnitudes in
// [1e-5, 1e6), else scientific ("1.234e-07").
std::string FormatSignificant(double x, int digits, Rounding r);

// A risk or rate in [0, 1] (also differences in [-1, 1]): six decimals, or
// four significant digits in scientific notation for magnitudes in (0, 1e-6)
// so that they do not print as zero.
std::string FormatUpper(double p);    // an upper bound: rounded up
std::string FormatLower(double p);    // a lower bound: rounded down
std::string FormatObserved(double p); // an observed value: nearest

// The same with an explicit sign ("+0.002664", "-0.010000").
std::string FormatSignedUpper(double d);
std::string FormatSignedLower(double d);

// FormatFailureProbability
// A failure probability (delta) requested, used or spent: four significant
// digits, rounded up ("0.01667" for 0.05 / 3).
std::string FormatFailureProbability(double delta);

// FormatConfidence
// The confidence level 1 - delta, rounded down and never 1: "0.95",
// "0.9833" (delta = 0.05/3 rounded up to 0.0167), "0.999999999", "1 - 1e-12".
// `delta` <= 0 gives "1" only when delta is exactly 0 (nothing was spent);
// delta >= 1 gives "0".
std::string FormatConfidence(double delta);

// FormatInput
// A value the user gave, echoed exactly (its shortest decimal).
std::string FormatInput(double x);

}  // namespace riskbound::cli

#endif  // RISKBOUND_CLIENT_CLI_FORMAT_H_
