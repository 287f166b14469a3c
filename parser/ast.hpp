// Syntax tree of one statement of the circuit language (NETLIST.md), as the
// X3 grammar (grammar_def.hpp) builds it. Plain structs, no behaviour.
//
// Every node that can be the subject of a diagnostic derives from Tagged and
// carries the [first, last) range of its source text: pointers into the
// loader's copy of the file, so a position is exact without a cache. The tree
// does not know about units, parameters or elements; the loader gives it
// meaning (load.cpp).
#pragma once

#include <boost/optional.hpp>
#include <boost/spirit/home/x3/support/ast/variant.hpp>
#include <string>
#include <vector>

namespace ringdown::ast {

namespace x3 = boost::spirit::x3;

struct Tagged {
  const char* first = nullptr;
  const char* last = nullptr;
};

// A numeric token as written: digits, point, exponent and any letters that
// follow ("4k7", "10mH", "1meg"); decoded by literal.cpp.
struct Number : Tagged {
  std::string text;
};
// An identifier, possibly dotted ("SN1.R1.p"); IEC codes such as R47 also
// arrive here and are recognised where a value is expected.
struct Name : Tagged {
  std::string text;
};
struct String : Tagged {
  std::string text;  // without the quotes
};

struct Call;
struct Group;
struct Unary;
struct Chain;

struct Operand : x3::variant<Number, Name, String, x3::forward_ast<Call>, x3::forward_ast<Group>,
                             x3::forward_ast<Unary>, x3::forward_ast<Chain>> {
  using base_type::base_type;
  using base_type::operator=;
};

struct Unary : Tagged {
  char op = '-';
  Operand operand;
};

// One "op operand" link of a left-to-right chain (a + b - c, a * b / c, a ^ b).
struct Operation : Tagged {
  char op = '+';
  Operand operand;
};

struct Chain : Tagged {
  Operand head;
  std::vector<Operation> tail;
};

// A call argument: `key=value`, a positional value, or (points) a pair
// `time value` written side by side.
struct Argument : Tagged {
  boost::optional<Name> key;  // a Name, not a string: X3 would append to a string in place
  Operand value;
  boost::optional<Operand> second;
};

struct Call : Tagged {
  std::string function;
  std::vector<Argument> args;
};

// `(a)` or `(a, b, ...)`: a parenthesised expression, or a list (ports,
// coupled inductors, control nodes, sweep values).
struct Group : Tagged {
  char open = '(';  // makes Group a two-member sequence for X3 (see ast_adapted.hpp)
  std::vector<Operand> items;
};

// --- Statements --------------------------------------------------------------

// NAME = EXPRESSION
struct ParameterLine : Tagged {
  Name name;
  Operand value;
};

// report NAME = FIGURE
struct ReportLine : Tagged {
  Name keyword;
  Name name;
  Operand figure;
};

// sweep PARAM = LIST
struct SweepLine : Tagged {
  Name keyword;
  Name name;
  Operand list;
};

struct RecordEntry : Tagged {
  boost::optional<Name> name;
  Operand expr;
};

// record S, S, ...
struct RecordLine : Tagged {
  Name keyword;
  std::vector<RecordEntry> entries;
};

// expect FIGURE OP VALUE [within TOL]
struct ExpectLine : Tagged {
  Name keyword;
  Operand figure;
  std::string op;
  Operand value;
  boost::optional<Operand> within;
};

// key=value on a command line.
struct Attribute : Tagged {
  Name key;
  Operand value;
};

struct Item : x3::variant<Attribute, Operand> {
  using base_type::base_type;
  using base_type::operator=;
};

// Every other statement: a keyword followed by positional values and
// key=value attributes (elements, use, block, end, include, title,
// transient, frequency, modes, trials, couple).
struct Command : Tagged {
  Name keyword;
  std::vector<Item> items;
};

struct Statement : x3::variant<ParameterLine, ReportLine, SweepLine, RecordLine, ExpectLine,
                               Command> {
  using base_type::base_type;
  using base_type::operator=;
};

}  // namespace ringdown::ast
