// Diagnostics as values: every stage reports problems as Diagnostic objects;
// only cli prints them. A diagnostic carries the position of the offending
// token so it can be shown compiler-style:
//   file:line:col: error: message
//      source line
//      ^~~~
//   hint: ...
#pragma once

#include <string>
#include <vector>

namespace ringdown {

// A place in a source file. Lines and columns are 1-based; column counts
// characters after tab expansion is NOT applied (raw byte column, 1-based);
// the renderer expands tabs. line == 0 means "no position" (e.g. a command
// line flag or a whole-file problem).
struct SourcePosition {
  std::string file;
  int line = 0;
  int column = 0;
  int length = 1;           // characters to underline (>= 1)
  std::string source_line;  // the text of that line, without newline
};

enum class Severity { Error, Warning, Note };

struct Diagnostic {
  Severity severity = Severity::Error;
  SourcePosition where;
  std::string message;
  std::string hint;  // empty: none
};

using Diagnostics = std::vector<Diagnostic>;

bool has_errors(const Diagnostics& diagnostics);

Diagnostic make_diagnostic(Severity severity, const SourcePosition& where, std::string message,
                           std::string hint = {});

// Compiler-style text of one diagnostic (several lines, ends with '\n').
// Tabs in the source line are expanded to 8 columns; the caret follows.
std::string render(const Diagnostic& diagnostic);

}  // namespace ringdown
