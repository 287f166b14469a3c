// Fusion adaptations of the syntax tree (ast.hpp) for the X3 grammar. Only
// the members the grammar fills are adapted; the Tagged range is set by the
// rules' on_success handler (grammar_def.hpp), never by attribute
// propagation. Leaf tokens (Number, Name, String, Group) are filled by
// semantic actions instead, because single-member structs are fragile in X3
// (Group carries its '(' as a second member for the same reason).
#pragma once

#include <boost/fusion/include/adapt_struct.hpp>

#include "parser/ast.hpp"

BOOST_FUSION_ADAPT_STRUCT(ringdown::ast::Unary, op, operand)
BOOST_FUSION_ADAPT_STRUCT(ringdown::ast::Operation, op, operand)
BOOST_FUSION_ADAPT_STRUCT(ringdown::ast::Chain, head, tail)
BOOST_FUSION_ADAPT_STRUCT(ringdown::ast::Argument, key, value, second)
BOOST_FUSION_ADAPT_STRUCT(ringdown::ast::Call, function, args)
BOOST_FUSION_ADAPT_STRUCT(ringdown::ast::Group, open, items)
BOOST_FUSION_ADAPT_STRUCT(ringdown::ast::ParameterLine, name, value)
BOOST_FUSION_ADAPT_STRUCT(ringdown::ast::ReportLine, keyword, name, figure)
BOOST_FUSION_ADAPT_STRUCT(ringdown::ast::SweepLine, keyword, name, list)
BOOST_FUSION_ADAPT_STRUCT(ringdown::ast::RecordEntry, name, expr)
BOOST_FUSION_ADAPT_STRUCT(ringdown::ast::RecordLine, keyword, entries)
BOOST_FUSION_ADAPT_STRUCT(ringdown::ast::ExpectLine, keyword, figure, op, value, within)
BOOST_FUSION_ADAPT_STRUCT(ringdown::ast::Attribute, key, value)
BOOST_FUSION_ADAPT_STRUCT(ringdown::ast::Command, keyword, items)
