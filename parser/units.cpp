// Dimension algebra helpers and SI formatting (NETLIST.md section 2).
// Dimensions are powers of V, A and s, stored doubled so that square roots
// stay exact. This file names dimensions and formats numbers; it does not
// parse units (the parser does).
#include "parser/units.hpp"

#include <array>
#include <cmath>
#include <cstdio>
#include <string>
#include <utility>

namespace ringdown {

std::optional<Dimension> Dimension::pow_half(int p) const {
  // Component x (= 2e) raised to p/2 gives exponent e*p/2, stored as x*p/2.
  const auto scale = [p](int x) -> std::optional<int> {
    const long product = static_cast<long>(x) * p;
    if (product % 2 != 0) return std::nullopt;
    return static_cast<int>(product / 2);
  };
  const auto v = scale(volt2), a = scale(ampere2), s = scale(second2);
  if (!v || !a || !s) return std::nullopt;
  return Dimension{*v, *a, *s};
}

namespace {

struct NamedDimension {
  Dimension dimension;
  const char* symbol;
  const char* quantity;
};

// The SI derived units of NETLIST.md section 2, with the quantity each measures.
const std::array<NamedDimension, 10> kNamed = {{
    {Dimension::volt(), "V", "voltage"},
    {Dimension::ampere(), "A", "current"},
    {Dimension::second(), "s", "time"},
    {Dimension::ohm(), "Ohm", "resistance"},
    {Dimension::farad(), "F", "capacitance"},
    {Dimension::henry(), "H", "inductance"},
    {Dimension::watt(), "W", "power"},
    {Dimension::joule(), "J", "energy"},
    {Dimension::hertz(), "Hz", "frequency"},
    {Dimension::siemens(), "S", "conductance"},
}};

const NamedDimension* find_named(const Dimension& d) {
  for (const auto& named : kNamed) {
    if (named.dimension == d) return &named;
  }
  return nullptr;
}

// "V", "V^2", "V^0.5", "V^1.5" for a doubled exponent x > 0.
std::string power_text(const char* base, int doubled) {
  std::string out = base;
  if (doubled == 2) return out;
  if (doubled % 2 == 0) return out + '^' + std::to_string(doubled / 2);
  return out + '^' + std::to_string(doubled / 2) + ".5";
}

}  // namespace

std::string unit_symbol(const Dimension& d) {
  if (d.dimensionless()) return "";
  if (const NamedDimension* named = find_named(d)) return named->symbol;
  const std::array<std::pair<const char*, int>, 3> parts = {
      {{"V", d.volt2}, {"A", d.ampere2}, {"s", d.second2}}};
  std::string numerator, denominator;
  int denominator_count = 0;
  for (const auto& [base, doubled] : parts) {
    if (doubled > 0) {
      if (!numerator.empty()) numerator += '*';
      numerator += power_text(base, doubled);
    } else if (doubled < 0) {
      if (!denominator.empty()) denominator += '*';
      denominator += power_text(base, -doubled);
      ++denominator_count;
    }
  }
  if (numerator.empty()) numerator = "1";
  if (denominator.empty()) return numerator;
  if (denominator_count > 1) return numerator + "/(" + denominator + ')';
  return numerator + '/' + denominator;
}

std::string unit_description(const Dimension& d) {
  if (d.dimensionless()) return "dimensionless";
  if (const NamedDimension* named = find_named(d)) {
    return std::string(named->symbol) + " (" + named->quantity + ')';
  }
  return unit_symbol(d);
}

namespace {

// SI prefixes from atto to tera (the set NETLIST.md section 2 accepts); "u"
// stands for micro so that output stays ASCII.
constexpr std::array<const char*, 11> kPrefixes = {"a", "f", "p", "n", "u", "m",
                                                   "",  "k", "M", "G", "T"};
constexpr int kUnityPrefix = 6;       // index of "" in kPrefixes
constexpr int kLowestExponent = -18;  // atto
constexpr int kHighestExponent = 12;  // tera

// x (finite, > 0) with `digits` significant digits, fixed notation,
// trailing zeros and a trailing point removed.
std::string fixed_significant(double x, int digits) {
  const int magnitude = static_cast<int>(std::floor(std::log10(x)));
  const int decimals = std::max(0, digits - 1 - magnitude);
  char buffer[64];
  std::snprintf(buffer, sizeof buffer, "%.*f", decimals, x);
  std::string text = buffer;
  if (text.find('.') != std::string::npos) {
    while (text.back() == '0') text.pop_back();
    if (text.back() == '.') text.pop_back();
  }
  return text;
}

// Scientific notation without trailing zeros: "1.5e-21".
std::string scientific(double x, int digits) {
  char buffer[64];
  std::snprintf(buffer, sizeof buffer, "%.*e", std::max(digits - 1, 0), x);
  std::string text = buffer;
  const auto e = text.find('e');
  std::string mantissa = text.substr(0, e);
  std::string exponent = text.substr(e + 1);
  if (mantissa.find('.') != std::string::npos) {
    while (mantissa.back() == '0') mantissa.pop_back();
    if (mantissa.back() == '.') mantissa.pop_back();
  }
  // "e+21" -> "e21", "e-05" -> "e-5".
  std::string sign;
  std::size_t k = 0;
  if (exponent[k] == '+' || exponent[k] == '-') {
    if (exponent[k] == '-') sign = "-";
    ++k;
  }
  while (k + 1 < exponent.size() && exponent[k] == '0') ++k;
  return mantissa + 'e' + sign + exponent.substr(k);
}

std::string with_unit(const std::string& number, const std::string& prefix,
                      const std::string& unit) {
  if (unit.empty() && prefix.empty()) return number;
  return number + ' ' + prefix + unit;
}

}  // namespace

std::string format_si(double value, const std::string& unit, int digits) {
  digits = std::max(digits, 1);
  if (std::isnan(value)) return with_unit("nan", "", unit);
  if (std::isinf(value)) return with_unit(value > 0 ? "inf" : "-inf", "", unit);
  if (value == 0) return with_unit("0", "", unit);
  const std::string sign = value < 0 ? "-" : "";
  const double magnitude = std::fabs(value);

  // A bare number takes no prefix: "k" after a gain would read as a unit.
  if (unit.empty()) {
    const int exponent = static_cast<int>(std::floor(std::log10(magnitude)));
    if (exponent >= -4 && exponent < digits + 2) return sign + fixed_significant(magnitude, digits);
    return sign + scientific(magnitude, digits);
  }

  int exponent3 = static_cast<int>(std::floor(std::log10(magnitude) / 3.0)) * 3;
  // log10 may land just below a whole number (log10(1e-15) = -14.999...).
  if (magnitude / std::pow(10.0, exponent3) >= 1000.0) exponent3 += 3;
  if (magnitude / std::pow(10.0, exponent3) < 1.0) exponent3 -= 3;
  if (exponent3 < kLowestExponent || exponent3 > kHighestExponent) {
    return sign + scientific(magnitude, digits) + ' ' + unit;
  }
  double scaled = magnitude / std::pow(10.0, exponent3);
  std::string number = fixed_significant(scaled, digits);
  // Rounding to `digits` may give 1000 (999.96 -> "1000"): move up one prefix.
  if (std::stod(number) >= 1000.0) {
    exponent3 += 3;
    if (exponent3 > kHighestExponent) return sign + scientific(magnitude, digits) + ' ' + unit;
    scaled = magnitude / std::pow(10.0, exponent3);
    number = fixed_significant(scaled, digits);
  }
  const int index = kUnityPrefix + exponent3 / 3;
  return sign + with_unit(number, kPrefixes[static_cast<std::size_t>(index)], unit);
}

}  // namespace ringdown
