// The parser's entry points: text -> elaborated Circuit, with diagnostics; and the same in
// two steps, parse once (ParsedSource) then elaborate as often as needed with different
// --set values (what the sweep runner does for each point).
//
// Not here: running anything; the fmt layout's internals (format.cpp).
#pragma once

#include <memory>
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

// Read, parse and elaborate a file (and its includes): parse_file + elaborate.
LoadResult load_file(const std::string& path, const LoadOptions& options = {});
// Same for text in memory; `file_name` is used in diagnostics and to resolve
// includes and samples() files relative to its directory: parse_text + elaborate.
LoadResult load_text(std::string_view text, const std::string& file_name,
                     const LoadOptions& options = {});

// A file (and its includes) read and parsed: the loader's pass 1 (statements, syntax trees,
// block bodies, include cycles) with its diagnostics, kept so that the elaborations of many
// sweep points parse once. Immutable once made, so one ParsedSource may be elaborated from
// several threads at once. Its syntax trees point into the file texts it holds; it must stay
// alive while an elaboration runs, but a Circuit made from it keeps no pointer into it.
//
// What is read when: the file and its includes at parse time (once); samples() CSV files at
// elaboration (their reading depends on the point's parameters, e.g. scale=), so every
// elaboration reads them as load_file did.
class ParsedSource {
 public:
  struct Data;  // load.cpp
  explicit ParsedSource(std::unique_ptr<Data> data);
  ~ParsedSource();
  ParsedSource(const ParsedSource&) = delete;
  ParsedSource& operator=(const ParsedSource&) = delete;

  const std::string& file_name() const;
  // Pass 1 found an error (a syntax error, an unreadable file or include...): every
  // elaboration then fails, with these errors among its diagnostics.
  bool has_errors() const;
  const Data& data() const { return *data_; }

 private:
  std::unique_ptr<Data> data_;
};

// Pass 1 of load_file / load_text. Never null; problems are kept in the result and reported
// by elaborate() exactly where load_file / load_text report them.
std::shared_ptr<const ParsedSource> parse_file(const std::string& path);
std::shared_ptr<const ParsedSource> parse_text(std::string_view text, const std::string& file_name);
// Passes 2 and 3 with these options. The result (circuit, diagnostics and their order,
// positions of --set and --record values) is identical to load_file / load_text of the same
// text with the same options. Safe to call concurrently on one ParsedSource.
LoadResult elaborate(const ParsedSource& source, const LoadOptions& options = {});

// Canonical layout for `ringdown fmt` (comments kept, idempotent). Returns
// nullopt with diagnostics when the file does not parse.
std::optional<std::string> format_text(std::string_view text, const std::string& file_name,
                                       Diagnostics& diagnostics);

}  // namespace ringdown
