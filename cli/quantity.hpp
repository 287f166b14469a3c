// Numbers given on the command line (`--until 2m`, `--every 200n`,
// `--every 10us`), read as NETLIST.md section 2 writes numbers in a file:
// a decimal number with optional sign and exponent, then an optional SI
// prefix (a f p n u µ m k M G T, case-sensitive, and K for kilo), or an
// IEC 60062 letter-and-digit code (4k7, 2n2, R47, 4R7), then an optional unit
// symbol. This is a small reader of its own for flags only: file values are
// read by the parser, and `--set` values are expressions handed to it.
//
// Not accepted here: expressions and parameter names (a flag value is a
// literal), `%` and `deg`.
#pragma once

#include <optional>
#include <string>
#include <string_view>

namespace ringdown::cli {

struct QuantityResult {
  std::optional<double> value;  // in SI
  std::string error;            // why not, when value is empty
  std::string hint;             // e.g. "write 1M for mega"
};

// `unit` is the symbol the value must have if it carries one ("s" for
// times); a value without a unit is taken in that unit.
QuantityResult parse_quantity(std::string_view text, std::string_view unit);

}  // namespace ringdown::cli
