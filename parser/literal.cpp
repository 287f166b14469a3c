// Decoding of numeric literals (NETLIST.md section 2).
//
// A token is: mantissa, optional exponent, then a suffix. The suffix is one
// of: empty; a unit symbol; an SI prefix followed by an optional unit symbol;
// or, when the mantissa is a plain integer (or absent, for a name-shaped
// token), an IEC 60062 code: a prefix letter or R standing where the decimal
// point would be, digits, and an optional unit symbol. Prefixes are
// case-sensitive as SI defines them (SI Brochure, 9th edition, 2019, table 7);
// `K` is also kilo, as IEC 60062 writes resistor values.
#include "parser/literal.hpp"

#include <array>
#include <charconv>
#include <cmath>
#include <cstdlib>
#include <numbers>
#include <string>

namespace ringdown {

namespace {

struct PrefixEntry {
  std::string_view symbol;
  double factor;
};

// SI prefixes accepted after a number (SI Brochure 2019, table 7), plus `K`
// for kilo (IEC 60062) and both code points that users type for micro:
// U+00B5 MICRO SIGN and U+03BC GREEK SMALL LETTER MU.
constexpr std::array<PrefixEntry, 13> kPrefixes = {{
    {"a", 1e-18},  {"f", 1e-15}, {"p", 1e-12}, {"n", 1e-9}, {"u", 1e-6},
    {"\xC2\xB5", 1e-6}, {"\xCE\xBC", 1e-6}, {"m", 1e-3}, {"k", 1e3}, {"K", 1e3},
    {"M", 1e6},    {"G", 1e9},   {"T", 1e12},
}};

struct UnitEntry {
  std::string_view symbol;
  Dimension dimension;
  double factor;
};

const std::array<UnitEntry, 16>& unit_table() {
  static const std::array<UnitEntry, 16> table = {{
      {"Ohm", Dimension::ohm(), 1},
      {"ohm", Dimension::ohm(), 1},
      {"\xCE\xA9", Dimension::ohm(), 1},      // U+03A9 GREEK CAPITAL LETTER OMEGA
      {"\xE2\x84\xA6", Dimension::ohm(), 1},  // U+2126 OHM SIGN
      {"F", Dimension::farad(), 1},
      {"H", Dimension::henry(), 1},
      {"V", Dimension::volt(), 1},
      {"A", Dimension::ampere(), 1},
      {"s", Dimension::second(), 1},
      {"Hz", Dimension::hertz(), 1},
      {"W", Dimension::watt(), 1},
      {"J", Dimension::joule(), 1},
      {"S", Dimension::siemens(), 1},
      {"%", Dimension::none(), 0.01},
      {"deg", Dimension::none(), std::numbers::pi / 180.0},
      {"", Dimension::none(), 1},  // placeholder, never matched (see find_unit_symbol)
  }};
  return table;
}

// The prefix at the start of `text`, if any.
std::optional<PrefixEntry> leading_prefix(std::string_view text) {
  for (const PrefixEntry& p : kPrefixes) {
    if (text.substr(0, p.symbol.size()) == p.symbol) return p;
  }
  return std::nullopt;
}

bool is_digit(char c) { return c >= '0' && c <= '9'; }

// Suffix after a prefix: empty (bare number) or a unit without its own
// scaling (no "k%").
std::optional<Unit> unit_after_prefix(std::string_view rest) {
  if (rest.empty()) return Unit{};
  auto symbol = find_unit_symbol(rest);
  if (!symbol || symbol->factor != 1) return std::nullopt;
  return Unit{symbol->dimension};
}

// "4k7" style: digits before, letter, digits after, optional unit.
// `before` may be empty ("R47"). Returns nullopt when it does not fit.
std::optional<Literal> decode_iec(std::string_view before, std::string_view code) {
  double factor = 0;
  std::size_t letter = 0;
  if (!code.empty() && code[0] == 'R') {
    factor = 1;
    letter = 1;
  } else if (auto p = leading_prefix(code)) {
    factor = p->factor;
    letter = p->symbol.size();
  } else {
    return std::nullopt;
  }
  std::size_t k = letter;
  while (k < code.size() && is_digit(code[k])) ++k;
  if (k == letter) return std::nullopt;  // no digits after the letter
  std::string_view after = code.substr(letter, k - letter);
  auto unit = unit_after_prefix(code.substr(k));
  if (!unit) return std::nullopt;
  std::string digits = std::string(before.empty() ? "0" : before) + "." + std::string(after);
  Literal literal;
  literal.value = std::strtod(digits.c_str(), nullptr) * factor;
  literal.unit = *unit;
  return literal;
}

}  // namespace

std::optional<UnitSymbol> find_unit_symbol(std::string_view text) {
  if (text.empty()) return std::nullopt;
  for (const UnitEntry& u : unit_table()) {
    if (!u.symbol.empty() && u.symbol == text) return UnitSymbol{u.dimension, u.factor};
  }
  return std::nullopt;
}

bool is_iec_code(std::string_view text) {
  // NETLIST.md section 2: where a value is expected, a token of this shape
  // is always a number, zero-valued codes (R0, k00) included.
  return decode_iec("", text).has_value();
}

namespace {
std::optional<Literal> decode_number_unchecked(std::string_view text, LiteralError& error);
}

std::optional<Literal> decode_number(std::string_view text, LiteralError& error) {
  std::optional<Literal> literal = decode_number_unchecked(text, error);
  // 1e400 overflows a double to infinity (IEEE 754): an error here, not an infinite
  // period or resistance found much later.
  if (literal && !std::isfinite(literal->value)) {
    error.message = "'" + std::string(text) + "' is too large for a number (the largest is about 1.8e308)";
    return std::nullopt;
  }
  return literal;
}

namespace {
std::optional<Literal> decode_number_unchecked(std::string_view text, LiteralError& error) {
  // Split mantissa [exponent] suffix, mirroring the grammar's number token.
  std::size_t k = 0;
  while (k < text.size() && is_digit(text[k])) ++k;
  const std::size_t integer_end = k;
  bool plain_integer = true;
  if (k < text.size() && text[k] == '.') {
    plain_integer = false;
    ++k;
    while (k < text.size() && is_digit(text[k])) ++k;
  }
  if (k + 1 < text.size() && (text[k] == 'e' || text[k] == 'E')) {
    std::size_t j = k + 1;
    if (j < text.size() && (text[j] == '+' || text[j] == '-')) ++j;
    if (j < text.size() && is_digit(text[j])) {
      while (j < text.size() && is_digit(text[j])) ++j;
      k = j;
      plain_integer = false;
    }
  }
  const std::string mantissa(text.substr(0, k));
  const std::string_view suffix = text.substr(k);
  char* end = nullptr;
  const double base = std::strtod(mantissa.c_str(), &end);
  if (mantissa.empty() || end != mantissa.c_str() + mantissa.size()) {
    error.message = "'" + std::string(text) + "' is not a number";
    return std::nullopt;
  }
  Literal literal;
  literal.value = base;
  if (suffix.empty()) return literal;
  if (auto symbol = find_unit_symbol(suffix)) {
    literal.value = base * symbol->factor;
    literal.unit = symbol->dimension;
    return literal;
  }
  if (auto p = leading_prefix(suffix)) {
    if (auto unit = unit_after_prefix(suffix.substr(p->symbol.size()))) {
      literal.value = base * p->factor;
      literal.unit = *unit;
      return literal;
    }
  }
  if (plain_integer) {
    if (auto iec = decode_iec(text.substr(0, integer_end), suffix)) return iec;
  }
  // "meg" in any case: a habit from other tools; SI writes M.
  std::string lower(suffix.substr(0, 3));
  for (char& c : lower) c = static_cast<char>(c >= 'A' && c <= 'Z' ? c - 'A' + 'a' : c);
  if (lower == "meg") {
    error.message = "'" + std::string(text) + "': 'meg' is not a prefix; mega is 'M' (and 'm' is milli)";
    error.hint = "write " + mantissa + "M" + std::string(suffix.substr(3));
    return std::nullopt;
  }
  error.message = "'" + std::string(text) + "': unknown prefix or unit '" + std::string(suffix) + "'";
  error.hint =
      "prefixes: a f p n u µ m k K M G T; units: Ohm ohm Ω F H V A s Hz W J S % deg "
      "(case-sensitive: m is milli, M is mega)";
  return std::nullopt;
}

}  // namespace

}  // namespace ringdown
