// Dimension algebra and SI formatting (NETLIST.md section 2; SI prefixes
// after the SI Brochure, BIPM 2019, table 7, from memory).
#include <gtest/gtest.h>

#include "parser/units.hpp"

namespace ringdown {
namespace {

TEST(Units, DerivedUnitsFromBaseDimensions) {
  // NETLIST.md section 2: Ohm = V/A, F = A s/V, H = V s/A, W = V A, J = V A s,
  // Hz = 1/s, S = A/V.
  const auto V = Dimension::volt(), A = Dimension::ampere(), s = Dimension::second();
  EXPECT_EQ(V / A, Dimension::ohm());
  EXPECT_EQ(A * s / V, Dimension::farad());
  EXPECT_EQ(V * s / A, Dimension::henry());
  EXPECT_EQ(V * A, Dimension::watt());
  EXPECT_EQ(V * A * s, Dimension::joule());
  EXPECT_EQ(Dimension::none() / s, Dimension::hertz());
  EXPECT_EQ(A / V, Dimension::siemens());
  // Physical law: 1/sqrt(L C) is an angular frequency (1/s); sqrt(L/C) is a resistance.
  const auto lc = Dimension::henry() * Dimension::farad();
  EXPECT_EQ(lc.pow_half(-1), Dimension::hertz());
  EXPECT_EQ((Dimension::henry() / Dimension::farad()).pow_half(1), Dimension::ohm());
  // R C is a time constant; W s is J.
  EXPECT_EQ(Dimension::ohm() * Dimension::farad(), s);
  EXPECT_EQ(Dimension::watt() * s, Dimension::joule());
}

TEST(Units, PowHalf) {
  EXPECT_EQ(Dimension::volt().pow_half(4), (Dimension{4, 0, 0}));     // V^2
  EXPECT_EQ(Dimension::volt().pow_half(1), (Dimension{1, 0, 0}));     // V^0.5
  EXPECT_EQ(Dimension::volt().pow_half(0), Dimension::none());
  EXPECT_FALSE((Dimension{1, 0, 0}).pow_half(1).has_value());         // V^0.25
  EXPECT_EQ((Dimension{1, 0, 0}).pow_half(2), (Dimension{1, 0, 0}));   // (V^0.5)^1
  EXPECT_EQ((Dimension{1, 0, 0}).pow_half(6), (Dimension{3, 0, 0}));   // V^1.5
}

TEST(Units, Symbols) {
  EXPECT_EQ(unit_symbol(Dimension::ohm()), "Ohm");
  EXPECT_EQ(unit_symbol(Dimension::farad()), "F");
  EXPECT_EQ(unit_symbol(Dimension::hertz()), "Hz");
  EXPECT_EQ(unit_symbol(Dimension::siemens()), "S");
  EXPECT_EQ(unit_symbol(Dimension::none()), "");
  EXPECT_EQ(unit_symbol(Dimension{2, -2, 4}), "V*s^2/A");
  EXPECT_EQ(unit_symbol(Dimension{4, 0, 0}), "V^2");
  EXPECT_EQ(unit_symbol(Dimension{1, 0, 0}), "V^0.5");
  EXPECT_EQ(unit_symbol(Dimension{3, -1, 0}), "V^1.5/A^0.5");
  EXPECT_EQ(unit_symbol(Dimension{2, -2, -2}), "V/(A*s)");
  EXPECT_EQ(unit_symbol(Dimension{-2, 0, 0}), "1/V");
}

TEST(Units, Descriptions) {
  EXPECT_EQ(unit_description(Dimension::farad()), "F (capacitance)");
  EXPECT_EQ(unit_description(Dimension::henry()), "H (inductance)");
  EXPECT_EQ(unit_description(Dimension::ohm()), "Ohm (resistance)");
  EXPECT_EQ(unit_description(Dimension::volt()), "V (voltage)");
  EXPECT_EQ(unit_description(Dimension::ampere()), "A (current)");
  EXPECT_EQ(unit_description(Dimension::second()), "s (time)");
  EXPECT_EQ(unit_description(Dimension::hertz()), "Hz (frequency)");
  EXPECT_EQ(unit_description(Dimension::watt()), "W (power)");
  EXPECT_EQ(unit_description(Dimension::joule()), "J (energy)");
  EXPECT_EQ(unit_description(Dimension::siemens()), "S (conductance)");
  EXPECT_EQ(unit_description(Dimension::none()), "dimensionless");
  EXPECT_EQ(unit_description(Dimension{4, 0, 0}), "V^2");
}

TEST(Units, FormatSi) {
  // SI prefixes a..T (BIPM SI Brochure 2019, table 7; from memory).
  EXPECT_EQ(format_si(4700, "Ohm"), "4.7 kOhm");
  EXPECT_EQ(format_si(2.2e-9, "F"), "2.2 nF");
  EXPECT_EQ(format_si(0, "F"), "0 F");
  EXPECT_EQ(format_si(-50e-3, "V"), "-50 mV");
  EXPECT_EQ(format_si(1e-5, "s"), "10 us");
  EXPECT_EQ(format_si(1, "H"), "1 H");
  EXPECT_EQ(format_si(325, "V"), "325 V");
  EXPECT_EQ(format_si(1.5e6, "Hz"), "1.5 MHz");
  EXPECT_EQ(format_si(1e-15, "F"), "1 fF");
  EXPECT_EQ(format_si(1e-18, "F"), "1 aF");
  EXPECT_EQ(format_si(1e12, "Ohm"), "1 TOhm");
  EXPECT_EQ(format_si(123456, "Ohm"), "123.5 kOhm");       // 4 significant digits
  EXPECT_EQ(format_si(123456, "Ohm", 3), "123 kOhm");
  EXPECT_EQ(format_si(999.96, "V"), "1 kV");               // rounding carries the prefix
  EXPECT_EQ(format_si(0.99996, "A"), "1 A");
  EXPECT_EQ(format_si(3.3e-21, "F"), "3.3e-21 F");         // below atto: scientific
  EXPECT_EQ(format_si(4.5e15, "Ohm"), "4.5e15 Ohm");       // above tera: scientific
  EXPECT_EQ(format_si(-4.5e15, "Ohm"), "-4.5e15 Ohm");
  EXPECT_EQ(format_si(0.5, ""), "0.5");                    // bare numbers take no prefix
  EXPECT_EQ(format_si(1e-9, ""), "1e-9");
}

}  // namespace
}  // namespace ringdown
