#include "client_cli/format.h"

#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <string>

#include "absl/strings/str_cat.h"
#include "absl/strings/str_format.h"

namespace riskbound::cli {
namespace {

// A decimal: (neg ? -1 : 1) * digits * 10^scale, digits without leading
// zeros ("0" for zero).
struct Decimal {
  bool neg = false;
  std::string digits = "0";
  int scale = 0;
  bool zero() const { return digits == "0"; }
  // Power of ten of the leading digit.
  int lead() const { return scale + static_cast<int>(digits.size()) - 1; }
};

std::string StripLeadingZeros(std::string s) {
  std::size_t i = 0;
  while (i + 1 < s.size() && s[i] == '0') ++i;
  return s.substr(i);
}

// Adds one to a digit string.
std::string Increment(std::string s) {
  int i = static_cast<int>(s.size()) - 1;
  while (i >= 0 && s[i] == '9') s[i--] = '0';
  if (i < 0) return "1" + s;
  ++s[i];
  return s;
}

Decimal Parse(double x) {
  // Shortest "%.{p}e" that reads back as x: mantissa d.ddd, exponent E.
  char buf[64];
  for (int p = 0; p <= 16; ++p) {
    std::snprintf(buf, sizeof buf, "%.*e", p, x);
    if (std::strtod(buf, nullptr) == x) break;
  }
  Decimal d;
  std::string text(buf);
  if (!text.empty() && text[0] == '-') {
    d.neg = true;
    text = text.substr(1);
  }
  const std::size_t e = text.find('e');
  std::string mantissa = text.substr(0, e);
  const int exponent = std::atoi(text.c_str() + e + 1);
  std::string digits;
  for (char c : mantissa) {
    if (c != '.') digits += c;
  }
  // Drop trailing zeros into the scale.
  int scale = exponent - static_cast<int>(digits.size()) + 1;
  while (digits.size() > 1 && digits.back() == '0') {
    digits.pop_back();
    ++scale;
  }
  d.digits = StripLeadingZeros(digits);
  d.scale = d.digits == "0" ? 0 : scale;
  if (d.digits == "0") d.neg = false;
  return d;
}

// Rounds d so that its last digit has power of ten `target` (d keeps its
// digits when it already has none below `target`).
Decimal RoundToScale(const Decimal& d, int target, Rounding r) {
  if (d.zero() || d.scale >= target) return d;
  const int drop = target - d.scale;
  std::string kept;
  bool dropped_nonzero = false;
  bool half_or_more = false;
  const int n = static_cast<int>(d.digits.size());
  if (drop >= n) {
    kept = "0";
    dropped_nonzero = true;  // d is not zero
    half_or_more = drop == n && d.digits[0] >= '5';
  } else {
    kept = d.digits.substr(0, n - drop);
    for (int i = n - drop; i < n; ++i) dropped_nonzero = dropped_nonzero || d.digits[i] != '0';
    half_or_more = d.digits[n - drop] >= '5';
  }
  bool away = false;  // increase the magnitude
  switch (r) {
    case Rounding::kUp:
      away = dropped_nonzero && !d.neg;
      break;
    case Rounding::kDown:
      away = dropped_nonzero && d.neg;
      break;
    case Rounding::kNearest:
      away = half_or_more;
      break;
  }
  Decimal out;
  out.neg = d.neg;
  out.digits = StripLeadingZeros(away ? Increment(kept) : kept);
  out.scale = target;
  if (out.digits == "0") {
    out.neg = false;
    out.scale = 0;
  }
  return out;
}

// d with exactly `decimals` digits after the point. REQUIRES: d.scale >= -decimals.
std::string RenderFixed(const Decimal& d, int decimals) {
  std::string digits = d.digits;
  if (!d.zero()) digits += std::string(d.scale + decimals, '0');
  if (static_cast<int>(digits.size()) < decimals + 1) {
    digits = std::string(decimals + 1 - digits.size(), '0') + digits;
  }
  std::string out = d.neg ? "-" : "";
  const int int_len = static_cast<int>(digits.size()) - decimals;
  out += digits.substr(0, int_len);
  if (decimals > 0) absl::StrAppend(&out, ".", digits.substr(int_len));
  return out;
}

// d with as few digits as it needs (trailing zeros dropped).
std::string RenderShort(const Decimal& d) {
  if (d.zero()) return "0";
  // Normalise trailing zeros.
  Decimal n = d;
  while (n.digits.size() > 1 && n.digits.back() == '0') {
    n.digits.pop_back();
    ++n.scale;
  }
  const int lead = n.lead();
  if (lead >= -5 && lead < 6) return RenderFixed(n, n.scale < 0 ? -n.scale : 0);
  std::string out = n.neg ? "-" : "";
  out += n.digits.substr(0, 1);
  if (n.digits.size() > 1) absl::StrAppend(&out, ".", n.digits.substr(1));
  absl::StrAppendFormat(&out, "e%c%02d", lead < 0 ? '-' : '+', std::abs(lead));
  return out;
}

std::string NonFinite(double x) {
  if (std::isnan(x)) return "nan";
  return x > 0 ? "inf" : "-inf";
}

std::string FormatRisk(double p, Rounding r, bool sign) {
  if (!std::isfinite(p)) return NonFinite(p);
  std::string out;
  const double a = std::fabs(p);
  if (a > 0 && a < 1e-6) {
    // Four significant digits in scientific notation.
    const Decimal d = Parse(p);
    const Decimal rounded = RoundToScale(d, d.lead() - 3, r);
    std::string mantissa = rounded.digits;
    const int lead = rounded.lead();
    out = absl::StrCat(rounded.neg ? "-" : "", mantissa.substr(0, 1), ".",
                       (mantissa + "000").substr(1, 3),
                       absl::StrFormat("e%c%02d", lead < 0 ? '-' : '+', std::abs(lead)));
  } else {
    out = FormatFixed(p, 6, r);
  }
  if (sign && !out.empty() && out[0] != '-') out = "+" + out;
  return out;
}

}  // namespace

std::string ShortestDecimal(double x) {
  if (!std::isfinite(x)) return NonFinite(x);
  return RenderShort(Parse(x));
}

std::string FormatFixed(double x, int decimals, Rounding r) {
  if (!std::isfinite(x)) return NonFinite(x);
  const Decimal d = RoundToScale(Parse(x), -decimals, r);
  return RenderFixed(d, decimals);
}

std::string FormatSignificant(double x, int digits, Rounding r) {
  if (!std::isfinite(x)) return NonFinite(x);
  const Decimal d = Parse(x);
  if (d.zero()) return "0";
  return RenderShort(RoundToScale(d, d.lead() - (digits - 1), r));
}

std::string FormatUpper(double p) { return FormatRisk(p, Rounding::kUp, false); }
std::string FormatLower(double p) { return FormatRisk(p, Rounding::kDown, false); }
std::string FormatObserved(double p) { return FormatRisk(p, Rounding::kNearest, false); }
std::string FormatSignedUpper(double d) { return FormatRisk(d, Rounding::kUp, true); }
std::string FormatSignedLower(double d) { return FormatRisk(d, Rounding::kDown, true); }

std::string FormatFailureProbability(double delta) {
  return FormatSignificant(delta, 4, Rounding::kUp);
}

std::string FormatConfidence(double delta) {
  if (std::isnan(delta)) return "nan";
  if (delta == 0) return "1";
  if (delta >= 1) return "0";
  if (delta < 0) return "1";
  const Decimal d = Parse(delta);
  const Decimal up = RoundToScale(d, d.lead() - 2, Rounding::kUp);  // 3 significant digits
  if (up.lead() >= 0) return "0";                                   // delta rounded up to 1
  if (up.lead() < -9) return absl::StrCat("1 - ", RenderShort(up));
  // 1 - up exactly: (10^k - digits) * 10^-k with k = -up.scale.
  const int k = -up.scale;
  std::string one = "1" + std::string(k, '0');
  std::string m = std::string(one.size() - up.digits.size(), '0') + up.digits;
  std::string diff(one.size(), '0');
  int borrow = 0;
  for (int i = static_cast<int>(one.size()) - 1; i >= 0; --i) {
    int v = (one[i] - '0') - (m[i] - '0') - borrow;
    borrow = v < 0 ? 1 : 0;
    diff[i] = static_cast<char>('0' + (v + 10) % 10);
  }
  Decimal c;
  c.digits = StripLeadingZeros(diff);
  c.scale = -k;
  return RenderShort(c);
}

std::string FormatInput(double x) { return ShortestDecimal(x); }

}  // namespace riskbound::cli
