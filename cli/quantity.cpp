// The command-line number reader; see quantity.hpp. The grammar follows
// NETLIST.md section 2 literally; prefixes are SI (BIPM, SI Brochure 9th ed.
// 2019, table 7) and the letter codes IEC 60062.
#include "cli/quantity.hpp"

#include <array>
#include <cctype>
#include <cmath>
#include <cstdlib>
#include <string>
#include <utility>

namespace ringdown::cli {

namespace {

struct Prefix {
  std::string_view symbol;
  double factor;
};

// SI prefixes of NETLIST.md section 2 (SI Brochure 2019, table 7), `µ` as
// UTF-8 (U+00B5 MICRO SIGN and U+03BC GREEK SMALL LETTER MU both written by
// keyboards) and `K`, the IEC 60062 kilo.
constexpr std::array<Prefix, 14> kPrefixes = {{{"a", 1e-18},
                                               {"f", 1e-15},
                                               {"p", 1e-12},
                                               {"n", 1e-9},
                                               {"u", 1e-6},
                                               {"\xC2\xB5", 1e-6},
                                               {"\xCE\xBC", 1e-6},
                                               {"m", 1e-3},
                                               {"k", 1e3},
                                               {"K", 1e3},
                                               {"M", 1e6},
                                               {"G", 1e9},
                                               {"T", 1e12},
                                               {"R", 1.0}}};  // R: IEC 60062 "one", codes only

// Unit symbols of NETLIST.md section 2, and the dimension each stands for
// (so `Ohm`, `ohm` and `Ω` compare equal).
struct UnitSymbol {
  std::string_view symbol;
  std::string_view canonical;
};
constexpr std::array<UnitSymbol, 13> kUnits = {{{"Ohm", "Ohm"},
                                                {"ohm", "Ohm"},
                                                {"\xCE\xA9", "Ohm"},
                                                {"F", "F"},
                                                {"H", "H"},
                                                {"V", "V"},
                                                {"A", "A"},
                                                {"s", "s"},
                                                {"Hz", "Hz"},
                                                {"W", "W"},
                                                {"J", "J"},
                                                {"S", "S"},
                                                {"", ""}}};

std::optional<std::string_view> unit_of(std::string_view text) {
  for (const UnitSymbol& u : kUnits) {
    if (u.symbol == text) return u.canonical;
  }
  return std::nullopt;
}

// The prefix at the start of `text`, if any (longest match; R only when
// `allow_r`, since R alone is not a prefix after a plain number).
std::optional<Prefix> prefix_at(std::string_view text, bool allow_r) {
  for (const Prefix& p : kPrefixes) {
    if (p.symbol == "R" && !allow_r) continue;
    if (text.substr(0, p.symbol.size()) == p.symbol) return p;
  }
  return std::nullopt;
}

bool is_digit(char c) { return std::isdigit(static_cast<unsigned char>(c)) != 0; }

QuantityResult failure(std::string error, std::string hint = {}) {
  QuantityResult r;
  r.error = std::move(error);
  r.hint = std::move(hint);
  return r;
}

}  // namespace

QuantityResult parse_quantity(std::string_view text, std::string_view unit) {
  const std::string shown(text);
  if (text.empty()) return failure("empty value");

  std::size_t i = 0;
  bool negative = false;
  if (text[i] == '+' || text[i] == '-') {
    negative = text[i] == '-';
    ++i;
  }

  double magnitude = 0;
  std::string_view rest;
  // IEC 60062 codes: digits, a prefix letter (or R) as the decimal point,
  // digits: 4k7, 2n2, 4R7, R47, 1M5.
  {
    std::size_t j = i;
    while (j < text.size() && is_digit(text[j])) ++j;
    const auto letter = prefix_at(text.substr(j), true);
    if (letter && letter->symbol.size() == 1) {
      std::size_t k = j + 1;
      while (k < text.size() && is_digit(text[k])) ++k;
      const bool has_fraction = k > j + 1;
      const bool has_whole = j > i;
      // "4k7" or "R47" (R with a fraction); "4k" alone is a prefixed number.
      if (has_fraction && (has_whole || letter->symbol == "R")) {
        const std::string digits = std::string(text.substr(i, j - i)) + "." +
                                   std::string(text.substr(j + 1, k - j - 1));
        magnitude = std::strtod(digits.c_str(), nullptr) * letter->factor;
        rest = text.substr(k);
        if (!unit_of(rest)) {
          return failure("cannot read '" + shown + "' as a number: unexpected '" +
                         std::string(rest) + "'");
        }
        goto have_number;
      }
    }
  }
  {
    // Decimal number: digits [. digits] [e|E [sign] digits].
    std::size_t j = i;
    std::size_t digits = 0;
    while (j < text.size() && is_digit(text[j])) ++j, ++digits;
    if (j < text.size() && text[j] == '.') {
      ++j;
      while (j < text.size() && is_digit(text[j])) ++j, ++digits;
    }
    if (digits == 0) return failure("cannot read '" + shown + "' as a number");
    if (j < text.size() && (text[j] == 'e' || text[j] == 'E')) {
      std::size_t k = j + 1;
      if (k < text.size() && (text[k] == '+' || text[k] == '-')) ++k;
      if (k < text.size() && is_digit(text[k])) {
        while (k < text.size() && is_digit(text[k])) ++k;
        j = k;
      }
    }
    const std::string number(text.substr(i, j - i));
    magnitude = std::strtod(number.c_str(), nullptr);
    rest = text.substr(j);
    if (!rest.empty() && !unit_of(rest)) {
      const auto p = prefix_at(rest, false);
      if (!p) {
        return failure("cannot read '" + shown + "' as a number: unexpected '" +
                       std::string(rest) + "'");
      }
      const std::string_view after = rest.substr(p->symbol.size());
      if (!unit_of(after)) {
        if (rest.substr(0, 3) == "meg" || rest.substr(0, 3) == "Meg" ||
            rest.substr(0, 3) == "MEG") {
          return failure("'" + shown + "': 'meg' is not a prefix",
                         "write M for mega (1M = 1e6); m is milli");
        }
        return failure("cannot read '" + shown + "' as a number: unknown unit '" +
                       std::string(after) + "'");
      }
      magnitude *= p->factor;
      rest = after;
    }
  }
have_number:
  const std::string_view got = *unit_of(rest);
  const auto expected = unit_of(unit);
  if (!got.empty() && expected && got != *expected) {
    return failure("'" + shown + "' is in " + std::string(got) + ", expected " +
                   std::string(unit));
  }
  if (!std::isfinite(magnitude)) return failure("'" + shown + "' is not a finite number");
  QuantityResult ok;
  ok.value = negative ? -magnitude : magnitude;
  return ok;
}

}  // namespace ringdown::cli
