// Physical dimensions as powers of volt, ampere and second, and SI formatting.
// Ohm = V/A, F = A s/V, H = V s/A, W = V A, J = V A s, Hz = 1/s, S = A/V.
// Exponents are stored doubled so that sqrt (half-integer powers) stays exact.
#pragma once

#include <optional>
#include <string>

namespace ringdown {

struct Dimension {
  int volt2 = 0;    // 2 x power of V
  int ampere2 = 0;  // 2 x power of A
  int second2 = 0;  // 2 x power of s

  static Dimension none() { return {}; }
  static Dimension volt() { return {2, 0, 0}; }
  static Dimension ampere() { return {0, 2, 0}; }
  static Dimension second() { return {0, 0, 2}; }
  static Dimension ohm() { return {2, -2, 0}; }
  static Dimension farad() { return {-2, 2, 2}; }
  static Dimension henry() { return {2, -2, 2}; }
  static Dimension watt() { return {2, 2, 0}; }
  static Dimension joule() { return {2, 2, 2}; }
  static Dimension hertz() { return {0, 0, -2}; }
  static Dimension siemens() { return {-2, 2, 0}; }

  bool dimensionless() const { return volt2 == 0 && ampere2 == 0 && second2 == 0; }
  friend bool operator==(const Dimension&, const Dimension&) = default;
  Dimension operator*(const Dimension& o) const {
    return {volt2 + o.volt2, ampere2 + o.ampere2, second2 + o.second2};
  }
  Dimension operator/(const Dimension& o) const {
    return {volt2 - o.volt2, ampere2 - o.ampere2, second2 - o.second2};
  }
  // Raise to power p/2 (p = 2 x exponent). Returns nullopt when a component
  // would not be a whole multiple of 1/2.
  std::optional<Dimension> pow_half(int p) const;
};

// "Unknown unit" is represented by an empty optional (a bare number).
using Unit = std::optional<Dimension>;

// The usual symbol for a dimension: "V", "A", "s", "Ohm", "F", "H", "W", "J",
// "Hz", "S", "" (dimensionless), else a product like "V*s^2/A".
std::string unit_symbol(const Dimension& d);
// The user-facing name of a dimension for messages: "F (capacitance)" etc.
std::string unit_description(const Dimension& d);

// SI-prefixed number: format_si(4700, "Ohm") -> "4.7 kOhm"; format_si(2.2e-9, "F")
// -> "2.2 nF"; 3 significant digits by default; 0 -> "0 F".
std::string format_si(double value, const std::string& unit, int digits = 4);

}  // namespace ringdown
