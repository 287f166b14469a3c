// Numeric literals of NETLIST.md section 2: decimal numbers with an SI
// prefix and a unit symbol, and the IEC 60062 letter-and-digit code.
//
// decode_number() takes a Number token as the grammar saw it ("4k7",
// "10mH", "2.2E3", "1meg") and returns its value in SI with its unit, or an
// error message and hint. is_iec_code() tells whether a name-shaped token
// ("R47", "k22") is an IEC 60062 code, which is always a number where a value
// is expected. Nothing here knows about parameters or elements.
#pragma once

#include <optional>
#include <string>
#include <string_view>

#include "parser/units.hpp"

namespace ringdown {

struct Literal {
  double value = 0;
  Unit unit;  // empty: a bare number (unknown unit)
};

struct LiteralError {
  std::string message;
  std::string hint;
};

// Decode a number token; on failure `error` is filled and nullopt returned.
std::optional<Literal> decode_number(std::string_view text, LiteralError& error);

// True when `text` has the shape of an IEC 60062 code that starts with its
// letter: R or an SI prefix letter (or K), digits, optionally a unit symbol
// ("R47", "n22", "k47Ohm"). A code whose value is 0 ("R0") is not one.
bool is_iec_code(std::string_view text);

// A unit symbol ("Ohm", "F", "Hz", "%", "deg", ...): its dimension and the
// factor it applies (0.01 for %, pi/180 for deg, else 1).
struct UnitSymbol {
  Dimension dimension;
  double factor = 1;
};
std::optional<UnitSymbol> find_unit_symbol(std::string_view text);

}  // namespace ringdown
