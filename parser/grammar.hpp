// The X3 grammar's entry points. The rules themselves are defined in
// grammar_def.hpp and compiled once, in grammar.cpp; everything else in the
// parser calls these functions on the text of one logical statement (the
// statement splitter in source.hpp has already joined continuation lines and
// blanked comments, keeping every byte's offset).
#pragma once

#include <string>

#include "parser/ast.hpp"

namespace ringdown::grammar {

struct SyntaxError {
  const char* where = nullptr;  // the offending character
  std::string expected;         // "an expression", "')'", ... ; empty: unexpected text
};

// One whole statement; all of [first, last) must be consumed (trailing
// spaces allowed).
bool parse_statement(const char* first, const char* last, ast::Statement& out,
                     SyntaxError& error);

// One expression covering all of [first, last) (for --set values).
bool parse_expression(const char* first, const char* last, ast::Operand& out,
                      SyntaxError& error);

// The longest expression starting at `first`; returns where it stopped, or
// nullptr when no expression starts there (used to underline `2*Rb`).
const char* expression_end(const char* first, const char* last);

// One `record` entry (`drain`, `vds = drain - src`) covering [first, last),
// for --record.
bool parse_record_entry(const char* first, const char* last, ast::RecordEntry& out,
                        SyntaxError& error);

}  // namespace ringdown::grammar
