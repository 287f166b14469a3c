// Compiler-style rendering of diagnostics (STYLE.md, "Diagnostics"):
//   file:line:col: error: message
//   <the source line, tabs expanded to 8 columns>
//   <caret line ^~~~ under the offending token>
//   hint: ...
// This file only formats; it never prints (cli prints, ARCHITECTURE.md).
// Columns in SourcePosition are raw 1-based byte columns; here they are
// mapped to display columns: a tab advances to the next multiple of 8 and a
// UTF-8 continuation byte takes no column of its own (so `Ω` is one column).
#include "parser/diagnostic.hpp"

#include <utility>

#include <algorithm>
#include <string>
#include <vector>

namespace ringdown {

namespace {

// Tab stops every 8 columns: the usual terminal default (common practice, no source).
constexpr int kTabWidth = 8;

const char* severity_word(Severity severity) {
  switch (severity) {
    case Severity::Error: return "error";
    case Severity::Warning: return "warning";
    case Severity::Note: return "note";
  }
  return "error";
}

bool is_utf8_continuation(unsigned char c) { return (c & 0xC0u) == 0x80u; }

// The source line with tabs expanded, and for each byte offset 0..size the
// display column (0-based) at which that byte starts.
struct ExpandedLine {
  std::string text;
  std::vector<int> display_column;  // size = source.size() + 1
};

ExpandedLine expand_tabs(const std::string& source) {
  ExpandedLine out;
  out.display_column.reserve(source.size() + 1);
  int column = 0;
  for (char ch : source) {
    const auto c = static_cast<unsigned char>(ch);
    out.display_column.push_back(column);
    if (ch == '\t') {
      const int next = (column / kTabWidth + 1) * kTabWidth;
      out.text.append(static_cast<std::size_t>(next - column), ' ');
      column = next;
    } else if (c < 0x20 || c == 0x7f) {
      // Control characters (escape sequences, NUL, CR) would garble the
      // terminal: shown as '?', one column each.
      out.text.push_back('?');
      ++column;
    } else {
      out.text.push_back(ch);
      if (!is_utf8_continuation(c)) ++column;
    }
  }
  out.display_column.push_back(column);
  return out;
}

// Messages quote source text; control characters in them are written as
// \xNN so that they cannot garble the terminal.
std::string printable(const std::string& text) {
  std::string out;
  out.reserve(text.size());
  for (char ch : text) {
    const auto c = static_cast<unsigned char>(ch);
    if ((c < 0x20 && ch != '\n') || c == 0x7f) {
      static const char* digits = "0123456789abcdef";
      out += "\\x";
      out += digits[c >> 4];
      out += digits[c & 15];
    } else {
      out.push_back(ch);
    }
  }
  return out;
}

}  // namespace

bool has_errors(const Diagnostics& diagnostics) {
  return std::any_of(diagnostics.begin(), diagnostics.end(),
                     [](const Diagnostic& d) { return d.severity == Severity::Error; });
}

Diagnostic make_diagnostic(Severity severity, const SourcePosition& where, std::string message,
                           std::string hint) {
  Diagnostic d;
  d.severity = severity;
  d.where = where;
  d.message = std::move(message);
  d.hint = std::move(hint);
  return d;
}

std::string render(const Diagnostic& diagnostic) {
  const SourcePosition& where = diagnostic.where;
  std::string out;
  if (!where.file.empty()) {
    out += where.file;
    if (where.line > 0) {
      out += ':' + std::to_string(where.line);
      if (where.column > 0) out += ':' + std::to_string(where.column);
    }
    out += ": ";
  } else if (where.line > 0) {
    out += "line " + std::to_string(where.line);
    if (where.column > 0) out += ':' + std::to_string(where.column);
    out += ": ";
  }
  out += severity_word(diagnostic.severity);
  out += ": ";
  out += printable(diagnostic.message);
  out += '\n';

  if (where.line > 0 && !where.source_line.empty()) {
    const ExpandedLine line = expand_tabs(where.source_line);
    out += line.text;
    out += '\n';
    if (where.column > 0) {
      const int size = static_cast<int>(where.source_line.size());
      // Byte range [first, last) of the token, clamped to the line; a
      // column just past the end (an unexpected end of line) stays visible.
      const int first = std::min(where.column - 1, size);
      const int last = std::clamp(first + std::max(where.length, 1), first, size);
      const int from = line.display_column[static_cast<std::size_t>(first)];
      const int to = line.display_column[static_cast<std::size_t>(last)];
      out.append(static_cast<std::size_t>(from), ' ');
      out += '^';
      if (to - from > 1) out.append(static_cast<std::size_t>(to - from - 1), '~');
      out += '\n';
    }
  }
  if (!diagnostic.hint.empty()) {
    out += "hint: ";
    out += printable(diagnostic.hint);
    out += '\n';
  }
  return out;
}

}  // namespace ringdown
