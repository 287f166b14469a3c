// The parser's entry points: text -> elaborated Circuit, with diagnostics.
#pragma once

#include <optional>
#include <string>
#include <string_view>
#include <utility>
#include <vector>

#include "parser/circuit.hpp"
#include "parser/diagnostic.hpp"

namespace ringdown {

struct LoadOptions {
  // --set NAME=VALUE overrides, in command-line order. VALUE is an expression
  // in the language (may carry a unit, checked like one in the file). A VALUE
  // that is a sweep list ("(a, b, ...)", linear/geometric/e6/e12/e24/e96(...))
  // becomes a sweep of NAME in Circuit::sweeps instead (replacing the file's
  // sweep of NAME in its place, else after the file's sweeps).
  std::vector<std::pair<std::string, std::string>> overrides;
  // --record S,S,...: replaces the file's record list when non-empty.
  std::vector<std::string> records;
};

struct LoadResult {
  std::optional<Circuit> circuit;  // present when there is no error
  Diagnostics diagnostics;         // every error and warning, in file order
  bool ok() const { return circuit.has_value(); }
};

// Read, parse and elaborate a file (and its includes).
LoadResult load_file(const std::string& path, const LoadOptions& options = {});
// Same for text in memory; `file_name` is used in diagnostics and to resolve
// includes and samples() files relative to its directory.
LoadResult load_text(std::string_view text, const std::string& file_name,
                     const LoadOptions& options = {});

// Canonical layout for `ringdown fmt` (comments kept, idempotent). Returns
// nullopt with diagnostics when the file does not parse.
std::optional<std::string> format_text(std::string_view text, const std::string& file_name,
                                       Diagnostics& diagnostics);

}  // namespace ringdown
