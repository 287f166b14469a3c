// Printing of diagnostics to stderr; see console.hpp.
#include "cli/console.hpp"
#include <cerrno>
#include <cstring>
#include <fstream>

#include <cstdio>

namespace ringdown::cli {

namespace {

// The program name used as the "file" of a diagnostic without a position,
// as compilers do for command-line problems (common practice, no source).
constexpr const char* kProgramName = "ringdown";

void emit(const Diagnostic& diagnostic) {
  const std::string text = render(diagnostic);
  std::fflush(stdout);  // keep the order of interleaved stdout/stderr on a terminal
  std::fwrite(text.data(), 1, text.size(), stderr);
  std::fflush(stderr);
}

}  // namespace

Diagnostic command_line_diagnostic(Severity severity, const std::string& message,
                                   const std::string& hint) {
  Diagnostic d;
  d.severity = severity;
  d.where.file = kProgramName;
  d.message = message;
  d.hint = hint;
  return d;
}

DiagnosticCounts print_diagnostics(const Diagnostics& diagnostics, bool strict) {
  DiagnosticCounts counts;
  for (const Diagnostic& d : diagnostics) {
    if (d.severity == Severity::Warning && strict) {
      Diagnostic promoted = d;
      promoted.severity = Severity::Error;
      promoted.message += " [--strict]";
      emit(promoted);
      ++counts.errors;
      continue;
    }
    emit(d);
    if (d.severity == Severity::Error) ++counts.errors;
    if (d.severity == Severity::Warning) ++counts.warnings;
  }
  return counts;
}

void print_error(const std::string& message, const std::string& hint) {
  emit(command_line_diagnostic(Severity::Error, message, hint));
}

void print_warning(const std::string& message, const std::string& hint) {
  emit(command_line_diagnostic(Severity::Warning, message, hint));
}

bool readable_or_report(const std::string& path) {
  std::ifstream probe(path);
  if (probe) return true;
  print_error("cannot read '" + path + "': " + std::strerror(errno));
  return false;
}

}  // namespace ringdown::cli
