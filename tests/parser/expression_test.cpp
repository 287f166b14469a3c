// Parameters and expressions with units (NETLIST.md sections 2 and 3).
#include <gtest/gtest.h>

#include <cmath>
#include <numbers>

#include "parser_test_util.hpp"

namespace ringdown {
namespace {

using testing::all_messages;
using testing::element;
using testing::expect_error;
using testing::load;

const Parameter* param(const Circuit& c, const std::string& name) {
  for (const Parameter& p : c.parameters) {
    if (p.name == name) return &p;
  }
  return nullptr;
}

TEST(Expression, ParametersInAnyOrder) {
  auto r = load("Rtot = 2*Rb + 1k\nRb = 4k7\nresistor R1 a gnd (Rtot)\n");
  ASSERT_TRUE(r.ok()) << all_messages(r);
  EXPECT_DOUBLE_EQ(element(*r.circuit, "R1").value, 2 * 4700 + 1000);
  ASSERT_NE(param(*r.circuit, "Rb"), nullptr);
  EXPECT_EQ(param(*r.circuit, "Rb")->text, "4k7");
  EXPECT_EQ(param(*r.circuit, "Rtot")->where.line, 1);
}

TEST(Expression, OperatorsAndPrecedence) {
  // Ordinary arithmetic precedence; -2^2 = -(2^2) = -4 (common practice, no source).
  auto r = load("a = 1 + 2*3\nb = -2^2\nc = 2^3^2\nd = (1+2)*3\ne = 8/4/2\nf = 2^-1\n");
  ASSERT_TRUE(r.ok()) << all_messages(r);
  EXPECT_DOUBLE_EQ(param(*r.circuit, "a")->value, 7);
  EXPECT_DOUBLE_EQ(param(*r.circuit, "b")->value, -4);
  EXPECT_DOUBLE_EQ(param(*r.circuit, "c")->value, 512);
  EXPECT_DOUBLE_EQ(param(*r.circuit, "d")->value, 9);
  EXPECT_DOUBLE_EQ(param(*r.circuit, "e")->value, 1);
  EXPECT_DOUBLE_EQ(param(*r.circuit, "f")->value, 0.5);
}

TEST(Expression, Functions) {
  auto r = load(
      "a = sqrt(16)\nb = exp(0)\nc = log(1)\nd = log10(1000)\ne = sin(pi/2)\nf = cos(0)\n"
      "g = tan(0)\nh = atan(1)\ni = abs(-3)\nj = min(3, 1, 2)\nk = max(3, 5)\nl = pow(2, 10)\n");
  ASSERT_TRUE(r.ok()) << all_messages(r);
  const Circuit& c = *r.circuit;
  EXPECT_DOUBLE_EQ(param(c, "a")->value, 4);
  EXPECT_DOUBLE_EQ(param(c, "b")->value, 1);
  EXPECT_DOUBLE_EQ(param(c, "c")->value, 0);
  EXPECT_DOUBLE_EQ(param(c, "d")->value, 3);
  EXPECT_DOUBLE_EQ(param(c, "e")->value, 1);
  EXPECT_DOUBLE_EQ(param(c, "f")->value, 1);
  EXPECT_DOUBLE_EQ(param(c, "g")->value, 0);
  EXPECT_DOUBLE_EQ(param(c, "h")->value, std::numbers::pi / 4);
  EXPECT_DOUBLE_EQ(param(c, "i")->value, 3);
  EXPECT_DOUBLE_EQ(param(c, "j")->value, 1);
  EXPECT_DOUBLE_EQ(param(c, "k")->value, 5);
  EXPECT_DOUBLE_EQ(param(c, "l")->value, 1024);
}

TEST(Expression, UnitsCombine) {
  auto r = load("Lk = 4uH\nCq = 1nF\nZ = sqrt(Lk/Cq)\nP = 2V*3A\nf = 1/(2*pi*sqrt(Lk*Cq))\n"
                "T = 1/1kHz\nE = 1V * 1A * 1s\n");
  ASSERT_TRUE(r.ok()) << all_messages(r);
  const Circuit& c = *r.circuit;
  EXPECT_EQ(param(c, "Z")->unit, Dimension::ohm());  // sqrt(H/F) = Ohm (NETLIST.md)
  EXPECT_DOUBLE_EQ(param(c, "Z")->value, std::sqrt(4e-6 / 1e-9));
  EXPECT_EQ(param(c, "P")->unit, Dimension::watt());
  EXPECT_FALSE(param(c, "f")->unit.has_value());  // 2*pi is a bare number: unknown unit
  // 1/1kHz: the bare 1 makes the unit unknown (NETLIST.md section 2).
  EXPECT_FALSE(param(c, "T")->unit.has_value());
  EXPECT_EQ(param(c, "E")->unit, Dimension::joule());
}

TEST(Expression, BareNumbersKeepKnownUnitThroughAddition) {
  auto r = load("x = 1V + 2\ny = 2*3V\nz = max(1, 2A)\n");
  ASSERT_TRUE(r.ok()) << all_messages(r);
  EXPECT_EQ(param(*r.circuit, "x")->unit, Dimension::volt());
  EXPECT_FALSE(param(*r.circuit, "y")->unit.has_value());
  EXPECT_EQ(param(*r.circuit, "z")->unit, Dimension::ampere());
}

TEST(Expression, AdditionNeedsEqualUnits) {
  auto r = load("x = 1V + 2A\n");
  expect_error(r, 1, 5, "cannot add a value in A (current) to one in V (voltage)");
}

TEST(Expression, MinMaxNeedEqualUnits) {
  auto r = load("x = min(1V, 2s)\n");
  expect_error(r, 1, 5, "min() of values in V");
}

TEST(Expression, FunctionsNeedDimensionlessArguments) {
  auto r = load("x = exp(2s)\n");
  expect_error(r, 1, 9, "exp() needs a dimensionless argument");
}

TEST(Expression, HalfIntegerPowers) {
  auto ok = load("a = (4V)^0.5\nb = (2A)^-2\n");
  ASSERT_TRUE(ok.ok()) << all_messages(ok);
  EXPECT_EQ(param(*ok.circuit, "a")->unit, Dimension::volt().pow_half(1));
  EXPECT_EQ(param(*ok.circuit, "b")->unit, Dimension::ampere().pow_half(-4));
  auto bad = load("a = (4V)^0.3\n");
  expect_error(bad, 1, 5, "integer or half-integer power");
}

TEST(Expression, CycleIsNamed) {
  auto r = load("a = b + 1\nb = c * 2\nc = a\n");
  expect_error(r, 1, 1, "cycle: a -> b -> c -> a");
}

TEST(Expression, SelfReference) {
  auto r = load("a = a + 1\n");
  expect_error(r, 1, 1, "cycle: a -> a");
}

TEST(Expression, DivisionByZeroAtTheDefiningLine) {
  auto r = load("z = 0\nx = 1/z\nresistor R1 a gnd (x)\n");
  expect_error(r, 2, 7, "division by zero");
  EXPECT_EQ(testing::find_diagnostic(r, "division by zero")->where.length, 1);
}

TEST(Expression, NegativeSquareRoot) {
  auto r = load("x = sqrt(-4)\n");
  expect_error(r, 1, 5, "square root of a negative value");
}

TEST(Expression, NonFinite) {
  auto r = load("x = 1e300 * 1e300\ny = log(0)\n");
  expect_error(r, 1, 5, "not a finite number");
  expect_error(r, 2, 5, "log() of a value that is not positive");
}

TEST(Expression, UnknownParameterWithSuggestion) {
  auto r = load("Rbase = 1k\nresistor R1 a gnd (2*Rbsae)\n");
  expect_error(r, 2, 22, "unknown parameter 'Rbsae'", "did you mean 'Rbase'?");
}

TEST(Expression, UnknownFunction) {
  auto r = load("x = sqr(4)\n");
  expect_error(r, 1, 5, "unknown function 'sqr'", "did you mean 'sqrt'?");
}

TEST(Expression, ParameterNamedLikeIecCodeIsAnError) {
  auto r = load("R47 = 1\n");
  expect_error(r, 1, 1, "'R47' is an IEC 60062 value code", "always a number");
}

TEST(Expression, ReservedWordAsParameter) {
  auto r = load("pi = 3\n");
  expect_error(r, 1, 1, "'pi' is a reserved word");
}

TEST(Expression, DuplicateParameter) {
  auto r = load("x = 1\nx = 2\n");
  expect_error(r, 2, 1, "parameter 'x' is defined twice", "first defined at line 1");
}

TEST(Expression, TimeOnlyInsideFormula) {
  auto r = load("x = 2*t\n");
  expect_error(r, 1, 7, "'t' (time) can only be used inside formula");
}

TEST(Expression, UnitMismatchThroughAParameterNamesBothUnits) {
  auto r = load("Lx = 2.2uH\ncapacitor C1 a gnd Lx\nresistor R1 a gnd 1k\n");
  expect_error(r, 2, 20, "is in H (inductance), but a capacitance is in F", "Lx = 2.2uH (line 1)");
}

TEST(Expression, UnknownUnitTakesTheExpectedOne) {
  auto r = load("Rbase = 1k\nresistor R1 a gnd (2*Rbase + 1k)\n");
  ASSERT_TRUE(r.ok()) << all_messages(r);
  EXPECT_DOUBLE_EQ(element(*r.circuit, "R1").value, 3000);
}

TEST(Expression, SetOverridesAParameter) {
  LoadOptions o;
  o.overrides = {{"Rb", "2.2kOhm"}};
  auto r = load("Rb = 1k\nresistor R1 a gnd Rb\n", o);
  ASSERT_TRUE(r.ok()) << all_messages(r);
  EXPECT_DOUBLE_EQ(element(*r.circuit, "R1").value, 2200);
}

TEST(Expression, SetValueWithWrongUnitIsChecked) {
  LoadOptions o;
  o.overrides = {{"Cx", "1uH"}};
  auto r = load("Cx = 1u\ncapacitor C1 a gnd Cx\nresistor R1 a gnd 1k\n", o);
  EXPECT_FALSE(r.ok());
  ASSERT_NE(testing::find_diagnostic(r, "but a capacitance is in F"), nullptr) << all_messages(r);
}

TEST(Expression, SetUnknownNameSuggests) {
  LoadOptions o;
  o.overrides = {{"Rbse", "1k"}};
  auto r = load("Rbase = 1k\nresistor R1 a gnd Rbase\n", o);
  const Diagnostic* d = testing::find_diagnostic(r, "there is no parameter 'Rbse'");
  ASSERT_NE(d, nullptr) << all_messages(r);
  EXPECT_EQ(d->where.line, 0);  // command line: no file position
  EXPECT_NE(d->hint.find("did you mean 'Rbase'?"), std::string::npos);
}

TEST(Expression, SetValueSyntaxError) {
  LoadOptions o;
  o.overrides = {{"Rb", "2*"}};
  auto r = load("Rb = 1k\nresistor R1 a gnd Rb\n", o);
  EXPECT_NE(testing::find_diagnostic(r, "--set Rb: expected"), nullptr) << all_messages(r);
}

}  // namespace
}  // namespace ringdown
