// The one place where diagnostics are printed (STYLE.md, "Diagnostics":
// build them as values, print them in one place). Everything goes to stderr,
// rendered compiler-style by ringdown::render(). Nothing else in cli writes
// diagnostics; results go to stdout or files.
#pragma once

#include <string>

#include "parser/diagnostic.hpp"

namespace ringdown::cli {

struct DiagnosticCounts {
  int errors = 0;
  int warnings = 0;  // after --strict these are counted as errors instead
};

// Prints every diagnostic to stderr. With `strict`, warnings are promoted to
// errors (printed as "error:", with a note saying --strict did it).
DiagnosticCounts print_diagnostics(const Diagnostics& diagnostics, bool strict = false);

// A problem that belongs to no file position (a flag, a missing file, an I/O
// failure): printed as "ringdown: error: message" and an optional hint.
void print_error(const std::string& message, const std::string& hint = {});
void print_warning(const std::string& message, const std::string& hint = {});

// True when `path` can be opened for reading; otherwise prints
// "cannot read 'PATH': REASON" and returns false (the command exits 2).
bool readable_or_report(const std::string& path);

// Builds the Diagnostic that print_error prints (so tests and callers can
// collect command-line problems as values too).
Diagnostic command_line_diagnostic(Severity severity, const std::string& message,
                                   const std::string& hint = {});

}  // namespace ringdown::cli
