// Numbers, prefixes, IEC 60062 codes and unit symbols (NETLIST.md section 2).
#include <gtest/gtest.h>

#include <cmath>

#include "parser/literal.hpp"
#include "parser_test_util.hpp"

namespace ringdown {
namespace {

double value_of(const std::string& token) {
  LiteralError e;
  auto lit = decode_number(token, e);
  EXPECT_TRUE(lit.has_value()) << token << ": " << e.message;
  return lit ? lit->value : std::nan("");
}

Unit unit_of(const std::string& token) {
  LiteralError e;
  auto lit = decode_number(token, e);
  EXPECT_TRUE(lit.has_value()) << token;
  return lit ? lit->unit : Unit{};
}

TEST(Literal, DecimalNumbers) {
  // Plain decimal notation; expected values are exact arithmetic (no source needed).
  EXPECT_DOUBLE_EQ(value_of("47"), 47);
  EXPECT_DOUBLE_EQ(value_of("4.7"), 4.7);
  EXPECT_DOUBLE_EQ(value_of("1e-9"), 1e-9);
  EXPECT_DOUBLE_EQ(value_of("2.2E3"), 2200);
  EXPECT_DOUBLE_EQ(value_of(".5"), 0.5);
  EXPECT_FALSE(unit_of("47").has_value());  // a bare number has no unit
}

TEST(Literal, SiPrefixesAreCaseSensitive) {
  // SI Brochure, 9th edition (2019), table 7: m = 1e-3, M = 1e6 (from memory).
  EXPECT_DOUBLE_EQ(value_of("1m"), 1e-3);
  EXPECT_DOUBLE_EQ(value_of("1M"), 1e6);
  EXPECT_DOUBLE_EQ(value_of("3a"), 3e-18);
  EXPECT_DOUBLE_EQ(value_of("3f"), 3e-15);
  EXPECT_DOUBLE_EQ(value_of("3p"), 3e-12);
  EXPECT_DOUBLE_EQ(value_of("3n"), 3e-9);
  EXPECT_DOUBLE_EQ(value_of("3u"), 3e-6);
  EXPECT_DOUBLE_EQ(value_of("3\xC2\xB5"), 3e-6);  // U+00B5 MICRO SIGN
  EXPECT_DOUBLE_EQ(value_of("3\xCE\xBC"), 3e-6);  // U+03BC GREEK SMALL LETTER MU
  EXPECT_DOUBLE_EQ(value_of("3k"), 3e3);
  EXPECT_DOUBLE_EQ(value_of("3G"), 3e9);
  EXPECT_DOUBLE_EQ(value_of("3T"), 3e12);
  // IEC 60062 writes kilo as K for resistors (NETLIST.md section 2).
  EXPECT_DOUBLE_EQ(value_of("10K"), 1e4);
}

TEST(Literal, Iec60062LetterAndDigitCode) {
  // IEC 60062 letter and digit code: the letter stands for the decimal point.
  EXPECT_DOUBLE_EQ(value_of("4k7"), 4700);
  EXPECT_DOUBLE_EQ(value_of("2n2"), 2.2e-9);
  EXPECT_DOUBLE_EQ(value_of("4R7"), 4.7);
  EXPECT_DOUBLE_EQ(value_of("1M5"), 1.5e6);
  EXPECT_DOUBLE_EQ(value_of("4K7"), 4700);
  EXPECT_TRUE(is_iec_code("R47"));  // R47 = 0.47, decoded where a value is expected
  EXPECT_TRUE(is_iec_code("n22"));
  EXPECT_FALSE(is_iec_code("Rb"));
  EXPECT_FALSE(is_iec_code("R"));
  EXPECT_FALSE(is_iec_code("x47"));
}

TEST(Literal, IecCodeInACircuit) {
  // IEC 60062 letter and digit code: R47 = 0.47 Ohm, 4R7 = 4.7 Ohm.
  auto r = testing::load("resistor R1 a gnd R47\nresistor R2 a gnd 4R7\n");
  ASSERT_TRUE(r.ok()) << testing::all_messages(r);
  EXPECT_DOUBLE_EQ(testing::element(*r.circuit, "R1").value, 0.47);
  EXPECT_DOUBLE_EQ(testing::element(*r.circuit, "R2").value, 4.7);
}

TEST(Literal, UnitSymbols) {
  EXPECT_EQ(unit_of("10Ohm"), Dimension::ohm());
  EXPECT_EQ(unit_of("10ohm"), Dimension::ohm());
  EXPECT_EQ(unit_of("10\xCE\xA9"), Dimension::ohm());  // U+03A9 omega
  EXPECT_EQ(unit_of("10kOhm"), Dimension::ohm());
  EXPECT_EQ(unit_of("22uF"), Dimension::farad());
  EXPECT_EQ(unit_of("10mH"), Dimension::henry());
  EXPECT_EQ(unit_of("24V"), Dimension::volt());
  EXPECT_EQ(unit_of("2A"), Dimension::ampere());
  EXPECT_EQ(unit_of("1ms"), Dimension::second());
  EXPECT_EQ(unit_of("20MHz"), Dimension::hertz());
  EXPECT_EQ(unit_of("2W"), Dimension::watt());
  EXPECT_EQ(unit_of("1mJ"), Dimension::joule());
  EXPECT_EQ(unit_of("2mS"), Dimension::siemens());
  EXPECT_EQ(unit_of("1F"), Dimension::farad());   // F is farad ...
  EXPECT_FALSE(unit_of("1f").has_value());        // ... f is femto
  EXPECT_DOUBLE_EQ(value_of("1f"), 1e-15);
  EXPECT_DOUBLE_EQ(value_of("10%"), 0.1);
  EXPECT_NEAR(value_of("180deg"), 3.141592653589793, 1e-15);  // pi rad = 180 deg
  EXPECT_DOUBLE_EQ(value_of("4k7Ohm"), 4700);
  EXPECT_EQ(unit_of("2n2F"), Dimension::farad());
}

TEST(Literal, MegIsAnErrorWithHint) {
  LiteralError e;
  EXPECT_FALSE(decode_number("1meg", e));
  EXPECT_NE(e.message.find("mega is 'M'"), std::string::npos);
  EXPECT_EQ(e.hint, "write 1M");
  auto r = testing::load("resistor R1 a gnd 1meg\n");
  testing::expect_error(r, 1, 19, "'meg' is not a prefix", "write 1M");
}

TEST(Literal, UnknownSuffix) {
  auto r = testing::load("resistor R1 a gnd 10x\n");
  testing::expect_error(r, 1, 19, "unknown prefix or unit 'x'");
  LiteralError e;
  EXPECT_FALSE(decode_number("1E", e));
  EXPECT_FALSE(decode_number("1mm", e));
  EXPECT_FALSE(decode_number("1k%", e));
}

TEST(Literal, MilliVersusMegaInACircuit) {
  auto r = testing::load("resistor R1 a gnd 2m\nresistor R2 a gnd 2M\n");
  ASSERT_TRUE(r.ok()) << testing::all_messages(r);
  EXPECT_DOUBLE_EQ(testing::element(*r.circuit, "R1").value, 2e-3);
  EXPECT_DOUBLE_EQ(testing::element(*r.circuit, "R2").value, 2e6);
}

TEST(Literal, NegativeNumbers) {
  auto r = testing::load("voltage V1 a gnd -50m\nresistor R1 a gnd 1k\n");
  ASSERT_TRUE(r.ok()) << testing::all_messages(r);
  EXPECT_DOUBLE_EQ(testing::element(*r.circuit, "V1").waveform->value(0), -0.05);
}

// A literal beyond the largest double (about 1.8e308, IEEE 754 binary64) would become
// infinity; it is an error at its own position (found by the mutation fuzz test: an infinite
// pulse period used to reach the waveform's constructor).
TEST(Literal, OverflowIsAnErrorAtTheNumber) {
  auto r = testing::load("current I1 gnd a pulse(high=1m, period=11e30800us, width=1u)\nresistor R1 a gnd 1k\n");
  ASSERT_FALSE(r.ok());
  const std::string m = testing::all_messages(r);
  EXPECT_NE(m.find("'11e30800us' is too large for a number"), std::string::npos) << m;
  EXPECT_NE(m.find("1:40:"), std::string::npos) << m;  // the number starts at line 1, column 40
  // A denormal frequency (1e-320 Hz) makes an infinite period.
  auto f = testing::load("current I1 gnd a pulse(high=1m, freq=(1e-160*1e-160), width=1u)\nresistor R1 a gnd 1k\n");
  ASSERT_FALSE(f.ok());
  EXPECT_NE(testing::all_messages(f).find("finite"), std::string::npos) << testing::all_messages(f);
}

}  // namespace
}  // namespace ringdown
