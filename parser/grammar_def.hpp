// Rule definitions of the circuit language (NETLIST.md sections 1-7), in
// Boost.Spirit X3. Included by grammar.cpp only, so the grammar is compiled
// in one translation unit.
//
// What the grammar does: the shape of every statement and expression, with
// exact source ranges. What it does not: decide what a name means, decode
// numbers (literal.cpp), check units or counts (load.cpp). Statements are
// split and comments removed before the grammar sees them (source.cpp).
//
// Expression precedence, lowest first: + - (left), * / (left), unary - +,
// ^ (right; -2^2 = -(2^2)), then primaries: number, string, call, name,
// parenthesised group. A positional value on a command line is narrower: a
// primary with an optional leading minus, so `resistor R1 a b 2*Rb` stops at
// `*` and the loader can say to add parentheses (NETLIST.md section 3).
#pragma once

#include <boost/spirit/home/x3.hpp>
#include <boost/fusion/include/at_c.hpp>
#include <type_traits>

#include "parser/ast.hpp"
#include "parser/ast_adapted.hpp"

namespace ringdown::grammar {

namespace x3 = boost::spirit::x3;

// Records the source range of every Tagged node a rule produces. X3 passes
// the range after skipping leading blanks.
struct annotate_range {
  template <class Iterator, class Attribute, class Context>
  void on_success(const Iterator& first, const Iterator& last, Attribute& node, const Context&) {
    if constexpr (std::is_base_of_v<ast::Tagged, Attribute>) {
      static_cast<ast::Tagged&>(node).first = first;
      static_cast<ast::Tagged&>(node).last = last;
    }
  }
};

struct number_class : annotate_range {};
struct name_class : annotate_range {};
struct plain_name_class : annotate_range {};
struct string_class : annotate_range {};
struct call_class : annotate_range {};
struct points_call_class : annotate_range {};
struct argument_class : annotate_range {};
struct pair_argument_class : annotate_range {};
struct group_class : annotate_range {};
struct unary_class : annotate_range {};
struct minus_value_class : annotate_range {};
struct additive_operation_class : annotate_range {};
struct multiplicative_operation_class : annotate_range {};
struct power_operation_class : annotate_range {};
struct additive_class : annotate_range {};
struct multiplicative_class : annotate_range {};
struct power_class : annotate_range {};
struct parameter_line_class : annotate_range {};
struct report_line_class : annotate_range {};
struct sweep_line_class : annotate_range {};
struct record_line_class : annotate_range {};
struct record_entry_class : annotate_range {};
struct expect_line_class : annotate_range {};
struct attribute_class : annotate_range {};
struct command_class : annotate_range {};
struct keyword_report_class : annotate_range {};
struct keyword_sweep_class : annotate_range {};
struct keyword_record_class : annotate_range {};
struct keyword_expect_class : annotate_range {};

// Rule names are the words that follow "expected " in a syntax error.
x3::rule<class expr_class, ast::Operand> const expr = "an expression";
x3::rule<additive_class, ast::Chain> const additive = "an expression";
x3::rule<multiplicative_class, ast::Chain> const multiplicative = "an expression";
x3::rule<class term_class, ast::Operand> const term = "a value";
x3::rule<class unary_class_rule, ast::Operand> const unary = "a value";
x3::rule<unary_class, ast::Unary> const negation = "a value";
x3::rule<power_class, ast::Chain> const power = "a value";
x3::rule<additive_operation_class, ast::Operation> const additive_operation = "an operand";
x3::rule<multiplicative_operation_class, ast::Operation> const multiplicative_operation = "an operand";
x3::rule<power_operation_class, ast::Operation> const power_operation = "an exponent";
x3::rule<class primary_class, ast::Operand> const primary = "a value";
x3::rule<number_class, ast::Number> const number = "a number";
x3::rule<name_class, ast::Name> const name = "a name";
x3::rule<plain_name_class, ast::Name> const plain_name = "a name";
x3::rule<string_class, ast::String> const string = "a quoted string";
x3::rule<call_class, ast::Call> const call = "a function call";
x3::rule<points_call_class, ast::Call> const points_call = "points(time value, ...)";
x3::rule<argument_class, ast::Argument> const argument = "an argument";
x3::rule<pair_argument_class, ast::Argument> const pair_argument = "a pair 'time value'";
x3::rule<group_class, ast::Group> const group = "a parenthesised expression";
x3::rule<class signed_value_class, ast::Operand> const signed_value = "a value";
x3::rule<minus_value_class, ast::Unary> const minus_value = "a value";
x3::rule<class identifier_class, std::string> const identifier = "a name";
x3::rule<class closing_quote_class> const closing_quote = "a closing '\"'";
x3::rule<class closing_paren_class> const closing_paren = "')'";

x3::rule<parameter_line_class, ast::ParameterLine> const parameter_line = "a parameter line";
x3::rule<keyword_report_class, ast::Name> const keyword_report = "'report'";
x3::rule<keyword_sweep_class, ast::Name> const keyword_sweep = "'sweep'";
x3::rule<keyword_record_class, ast::Name> const keyword_record = "'record'";
x3::rule<keyword_expect_class, ast::Name> const keyword_expect = "'expect'";
x3::rule<report_line_class, ast::ReportLine> const report_line = "a report line";
x3::rule<sweep_line_class, ast::SweepLine> const sweep_line = "a sweep line";
x3::rule<record_entry_class, ast::RecordEntry> const record_entry = "a signal";
x3::rule<record_line_class, ast::RecordLine> const record_line = "a record line";
x3::rule<class compare_class, std::string> const compare = "a comparison (< <= > >= =)";
x3::rule<expect_line_class, ast::ExpectLine> const expect_line = "an expect line";
x3::rule<attribute_class, ast::Attribute> const attribute = "key=value";
x3::rule<class item_class, ast::Item> const item = "a value or key=value";
x3::rule<command_class, ast::Command> const command = "a statement";
x3::rule<class statement_class, ast::Statement> const statement = "a statement";

// --- Tokens -------------------------------------------------------------------

// A keyword: the word, not followed by a name character (so `recorder` is no
// `record`).
// Character classes are spelled as ranges: the standard encoding's
// classifiers assert on bytes above 0x7f, which UTF-8 text (µ, Ω) contains.
auto const digit = x3::char_('0', '9');
auto const name_start = x3::char_('a', 'z') | x3::char_('A', 'Z') | x3::char_('_');
auto const name_char = name_start | digit;
// Bytes of UTF-8 sequences (µ, Ω) may follow a number as prefix or unit.
auto const non_ascii = x3::char_('\x80', '\xff');
inline auto keyword(const char* word) { return x3::lexeme[x3::lit(word) >> !name_char]; }

auto const mantissa = (+digit >> -('.' >> *digit)) | ('.' >> +digit);
auto const exponent = x3::char_("eE") >> -x3::char_("+-") >> +digit;
auto const suffix_char = non_ascii | name_char | x3::char_('%');

// Rules with a semantic action get no attribute in on_success (X3 1.74
// passes `unused`), so the actions record the source range themselves.
auto const set_text = [](auto& ctx) {
  auto range = x3::_attr(ctx);
  auto& node = x3::_val(ctx);
  node.text.assign(range.begin(), range.end());
  node.first = range.begin();
  node.last = range.end();
};

auto const number_def = x3::raw[x3::lexeme[mantissa >> -exponent >> *suffix_char]][set_text];
auto const name_def =
    x3::raw[x3::lexeme[name_start >> *name_char >> *('.' >> name_start >> *name_char)]][set_text];
auto const plain_name_def = x3::raw[x3::lexeme[name_start >> *name_char]][set_text];
auto const identifier_def = x3::lexeme[name_start >> *name_char];
auto const closing_quote_def = x3::lit('"');
auto const closing_paren_def = x3::lit(')');
auto const set_string = [](auto& ctx) {
  auto range = x3::_attr(ctx);
  auto& node = x3::_val(ctx);
  node.text.assign(range.begin(), range.end());
  node.first = range.begin() - 1;  // include the quotes
  node.last = range.end() + 1;
};
auto const string_def =
    x3::lexeme['"' >> x3::raw[*(x3::char_ - '"' - x3::eol)][set_string] > closing_quote];

// --- Expressions --------------------------------------------------------------

auto const expr_def = additive;
auto const additive_operation_def = x3::char_("+-") > multiplicative;
auto const additive_def = multiplicative >> *additive_operation;
auto const multiplicative_operation_def = x3::char_("*/") > unary;
auto const multiplicative_def = unary >> *multiplicative_operation;
auto const term_def = multiplicative;
auto const negation_def = x3::char_("-+") > unary;
auto const unary_def = negation | power;
auto const power_operation_def = x3::char_('^') > unary;
auto const power_def = primary >> *power_operation;
auto const primary_def = number | string | points_call | call | name | group;

// A call: the function name directly followed by '(' (so `SN1 (a, b)` on a
// `use` line is a name and a list, not a call).
// X3 leaves a failed optional's partial attribute in place here (seen with
// 1.74: `-(name >> '=')` kept "drain" of `max(drain)`), so both forms are
// spelled out and the positional one overwrites the key with x3::attr.
auto const no_key = x3::attr(boost::optional<ast::Name>());
auto const no_second = x3::attr(boost::optional<ast::Operand>());
auto const argument_def = (((plain_name >> '=' >> !x3::lit('=')) > expr) >> no_second) |
                          (no_key >> expr >> no_second);
auto const no_arguments = &x3::lit(')') >> x3::attr(std::vector<ast::Argument>());
auto const call_def = x3::lexeme[identifier >> &x3::lit('(')] >> '(' >>
                      (no_arguments | (argument % ',')) > closing_paren;
// points(t1 v1, t2 v2, ...): the time is a product-level term so that
// `1m -5V` reads as the pair (1m, -5V).
auto const pair_argument_def = no_key >> term >> -expr;
auto const points_call_def = x3::lexeme[x3::string("points") >> &x3::lit('(')] >> '(' >>
                             (no_arguments | (pair_argument % ',')) > closing_paren;
auto const group_def = x3::char_('(') > (expr % ',') > closing_paren;

auto const minus_value_def = x3::char_('-') > primary;
auto const signed_value_def = minus_value | primary;

// --- Statements ---------------------------------------------------------------

auto const parameter_line_def = (plain_name >> '=' >> !x3::lit('=')) > expr;
auto const keyword_report_def = &keyword("report") >> plain_name;
auto const keyword_sweep_def = &keyword("sweep") >> plain_name;
auto const keyword_record_def = &keyword("record") >> plain_name;
auto const keyword_expect_def = &keyword("expect") >> plain_name;
auto const report_line_def = keyword_report > plain_name > '=' > expr;
auto const sweep_line_def = keyword_sweep > plain_name > '=' > expr;
auto const record_entry_def = (plain_name >> '=' >> !x3::lit('=') > expr) | (no_key >> expr);
auto const record_line_def = keyword_record > (record_entry % ',');
auto const compare_def = x3::string("<=") | x3::string(">=") | x3::string("<") |
                         x3::string(">") | x3::string("=");
auto const expect_line_def =
    keyword_expect > expr > compare > expr > -(keyword("within") > expr);
auto const attribute_def = (plain_name >> '=' >> !x3::lit('=')) > signed_value;
auto const item_def = attribute | signed_value;
auto const command_def = plain_name >> *item;
auto const statement_def =
    parameter_line | report_line | sweep_line | record_line | expect_line | command;

// Blanks between tokens; comments were replaced by spaces before parsing.
auto const blank = x3::char_(" \t\r\n\f\v");

BOOST_SPIRIT_DEFINE(expr, additive, multiplicative, term, unary, negation, power,
                    additive_operation, multiplicative_operation, power_operation, primary,
                    number, name, plain_name, string, call, points_call, argument, pair_argument,
                    group, signed_value, minus_value, identifier, closing_quote, closing_paren)
BOOST_SPIRIT_DEFINE(parameter_line, keyword_report, keyword_sweep, keyword_record,
                    keyword_expect, report_line, sweep_line, record_entry, record_line, compare,
                    expect_line, attribute, item, command, statement)

}  // namespace ringdown::grammar
