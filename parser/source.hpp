// Source text handling for the loader and the formatter: one file's text,
// a copy with comments blanked out (same byte offsets), the line table, and
// the split into logical statements (NETLIST.md section 1: one statement per
// line, continued while a parenthesis is open; `#` starts a comment).
//
// It does not parse statements (grammar.cpp does) and does not read files
// from disk (load.cpp does).
#pragma once

#include <cstddef>
#include <string>
#include <vector>

#include "parser/diagnostic.hpp"

namespace ringdown {

struct SourceFile {
  std::string path;       // as shown in diagnostics
  std::string directory;  // includes and samples() files are relative to it ("" = cwd)
  std::string text;       // as read
  std::string code;       // text with comments replaced by spaces
  bool command_line = false;  // a --set/--record value: positions have line 0
  std::vector<std::size_t> line_starts;   // offset of each line's first byte
  std::vector<std::size_t> comment_start; // per line: offset of '#', or npos

  // Fill code, line_starts and comment_start from text.
  void prepare();
  bool contains(const char* p) const {
    return p >= code.data() && p <= code.data() + code.size();
  }
  std::size_t offset(const char* p) const { return static_cast<std::size_t>(p - code.data()); }
  // 0-based line index of an offset.
  std::size_t line_of(std::size_t offset) const;
  std::string line_text(std::size_t line) const;  // without the newline
  // Position of [first, last) (pointers into code), for a Diagnostic.
  SourcePosition position(const char* first, const char* last) const;
};

struct RawStatement {
  const char* first = nullptr;  // into SourceFile::code; first non-blank byte
  const char* last = nullptr;   // one past the last byte (before the newline)
};

struct SplitProblem {
  const char* where = nullptr;
  std::string message;
  std::string hint;
};

// Split a prepared file into statements. A parenthesis still open at the end
// of a line continues the statement, unless the next line starts with a
// statement keyword: then the parenthesis is reported as unclosed and the
// statement ends there, so the lines that follow are still checked.
std::vector<RawStatement> split_statements(const SourceFile& file,
                                           std::vector<SplitProblem>& problems);

// Words that begin statements (used by the splitter's recovery, the loader's
// "did you mean" and the formatter).
bool is_statement_keyword(const std::string& word);
const std::vector<std::string>& statement_keywords();

}  // namespace ringdown
