// The one translation unit that compiles the X3 grammar (grammar_def.hpp)
// and turns its outcome into SyntaxError values: X3 expectation failures
// carry the position and the name of the rule that was expected.
#include "parser/grammar.hpp"

#include "parser/grammar_def.hpp"

namespace ringdown::grammar {

namespace {

template <class Rule, class Attribute>
bool parse_all(const char* first, const char* last, const Rule& rule, Attribute& out,
               SyntaxError& error) {
  const char* it = first;
  try {
    const bool ok = x3::phrase_parse(it, last, rule, blank, out);
    if (ok && it == last) return true;
    error.where = it;
    error.expected.clear();
    return false;
  } catch (const x3::expectation_failure<const char*>& failure) {
    error.where = failure.where();
    error.expected = failure.which();
    return false;
  }
}

}  // namespace

bool parse_statement(const char* first, const char* last, ast::Statement& out,
                     SyntaxError& error) {
  return parse_all(first, last, statement, out, error);
}

bool parse_expression(const char* first, const char* last, ast::Operand& out,
                      SyntaxError& error) {
  return parse_all(first, last, expr, out, error);
}

bool parse_record_entry(const char* first, const char* last, ast::RecordEntry& out,
                        SyntaxError& error) {
  return parse_all(first, last, record_entry, out, error);
}

const char* expression_end(const char* first, const char* last) {
  const char* it = first;
  ast::Operand out;
  try {
    if (!x3::phrase_parse(it, last, expr, blank, out)) return nullptr;
  } catch (const x3::expectation_failure<const char*>& failure) {
    return failure.where();
  }
  return it;
}

}  // namespace ringdown::grammar
