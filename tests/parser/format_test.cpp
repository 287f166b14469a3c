// format_text (`ringdown fmt`): canonical layout, comments kept, idempotent,
// and the formatted text means the same circuit.
#include <gtest/gtest.h>

#include <filesystem>
#include <fstream>
#include <sstream>

#include "parser_test_util.hpp"

namespace ringdown {
namespace {

std::string fmt(const std::string& text) {
  Diagnostics d;
  auto out = format_text(text, "test.rlc", d);
  EXPECT_TRUE(out.has_value()) << text;
  return out.value_or("");
}

const char* kMessy =
    "\n\n# header comment\ntitle   \"Demo\"\n\n\n\nLcoil=10mH   # coil\nRb =  2*Rx+1k\nRx = 1k\n"
    "voltage Vbus bus gnd   (12V+sine( amp = 0.5V , freq=100k ))\n"
    "inductor Lc bus drain Lcoil dcr = 48Ohm rated=1A\n"
    "voltage V2 m gnd -50m\n"
    "resistor Rm m drain (Rb*2)\n"
    "block rc (a,b) R=47 C=1n\n# inside\nresistor R1 a mid R\n    capacitor C1 mid b C esr=10m\nend\n"
    "use rc SN1 (drain,gnd) R=100\n"
    "voltage V3 x gnd points(0 0,1m -5V, 2m 1e-3)\nresistor Rx2 x gnd 1\n"
    "voltage V4 y gnd (step(to=1) +\n   sine(freq=1k))   # continued\nresistor Ry y gnd 1\n"
    "transient until=2m every=200n\nrecord drain,Lc.i , vds=drain-bus\nreport vpeak=max(drain)\n"
    "expect max(drain)<300V\nexpect final(drain)=24V within 1%\nsweep Rx=(1k,2k)\n\n\n";

TEST(Format, CanonicalLayout) {
  const std::string out = fmt(kMessy);
  const std::string expected =
      "# header comment\n"
      "title \"Demo\"\n"
      "\n"
      "Lcoil = 10mH  # coil\n"
      "Rb    = 2*Rx + 1k\n"
      "Rx    = 1k\n"
      "voltage   Vbus bus gnd (12V + sine(amp=0.5V, freq=100k))\n"
      "inductor  Lc   bus drain Lcoil dcr=48Ohm rated=1A\n"
      "voltage   V2   m   gnd   -50m\n"
      "resistor  Rm   m   drain (Rb*2)\n"
      "block rc (a, b) R=47 C=1n\n"
      "  # inside\n"
      "  resistor  R1 a   mid R\n"
      "  capacitor C1 mid b   C esr=10m\n"
      "end\n"
      "use       rc SN1 (drain, gnd) R=100\n"
      "voltage   V3  x gnd points(0 0, 1m -5V, 2m 1e-3)\n"
      "resistor  Rx2 x gnd 1\n"
      "voltage   V4 y gnd (step(to=1) +\n"
      "    sine(freq=1k))  # continued\n"
      "resistor  Ry y gnd 1\n"
      "transient until=2m every=200n\n"
      "record drain, Lc.i, vds = drain - bus\n"
      "report vpeak = max(drain)\n"
      "expect max(drain) < 300V\n"
      "expect final(drain) = 24V within 1%\n"
      "sweep Rx = (1k, 2k)\n";
  EXPECT_EQ(out, expected);
}

// Runs of element lines are tables; a blank line or a comment line ends a run, and a run's
// trailing comments share a column (docs/language.md, "Canonical layout").
TEST(Format, TablesEndAtBlankAndCommentLines) {
  const std::string in =
      "resistor R1 a b 1k # one\n"
      "capacitor Cbig a gnd 10u  tol=10% # two\n"
      "\n"
      "resistor R22 b gnd 47\n"
      "# note\n"
      "inductor L1 b c 1m\n";
  const std::string expected =
      "resistor  R1   a b   1k           # one\n"
      "capacitor Cbig a gnd 10u tol=10%  # two\n"
      "\n"
      "resistor  R22 b gnd 47\n"
      "# note\n"
      "inductor  L1 b c 1m\n";
  EXPECT_EQ(fmt(in), expected);
  EXPECT_EQ(fmt(expected), expected);
}

TEST(Format, Idempotent) {
  const std::string once = fmt(kMessy);
  EXPECT_EQ(fmt(once), once);
}

TEST(Format, SameCircuitAfterFormatting) {
  const std::string once = fmt(kMessy);
  auto a = testing::load(kMessy);
  auto b = testing::load(once);
  ASSERT_EQ(a.ok(), b.ok()) << testing::all_messages(a) << testing::all_messages(b);
  ASSERT_TRUE(a.ok()) << testing::all_messages(a);
  ASSERT_EQ(a.circuit->elements.size(), b.circuit->elements.size());
  for (std::size_t k = 0; k < a.circuit->elements.size(); ++k) {
    EXPECT_EQ(a.circuit->elements[k].name, b.circuit->elements[k].name);
    EXPECT_DOUBLE_EQ(a.circuit->elements[k].value, b.circuit->elements[k].value);
  }
  EXPECT_EQ(a.circuit->records.size(), b.circuit->records.size());
}

TEST(Format, SyntaxErrorGivesNoText) {
  Diagnostics d;
  auto out = format_text("resistor R1 a b (1k\n", "test.rlc", d);
  EXPECT_FALSE(out.has_value());
  ASSERT_FALSE(d.empty());
  EXPECT_EQ(d[0].where.line, 1);
}

TEST(Format, EveryShippedCircuitIsIdempotent) {
  namespace fs = std::filesystem;
  const fs::path dir = fs::path(RINGDOWN_SOURCE_DIR) / "circuits";
  int files = 0;
  if (fs::exists(dir)) {
    for (const auto& entry : fs::recursive_directory_iterator(dir)) {
      if (entry.path().extension() != ".rlc") continue;
      std::ifstream in(entry.path());
      std::stringstream ss;
      ss << in.rdbuf();
      Diagnostics d;
      auto once = format_text(ss.str(), entry.path().string(), d);
      ASSERT_TRUE(once.has_value()) << entry.path();
      auto twice = format_text(*once, entry.path().string(), d);
      ASSERT_TRUE(twice.has_value());
      EXPECT_EQ(*once, *twice) << entry.path();
      // The shipped examples are kept in canonical layout (`ringdown fmt --check circuits/*.rlc`
      // passes), so a user's first fmt run on a copy changes nothing.
      EXPECT_EQ(ss.str(), *once) << entry.path() << " is not in canonical layout: run ringdown fmt on it";
      ++files;
    }
  }
  std::printf("fmt checked on %d files in circuits/\n", files);
}

TEST(Format, TestTextsAreIdempotent) {
  const char* texts[] = {
      "x = -2^2\ny = a -b\nz = a - -b\n",
      "expect rise(out, lo=10%, hi=90%) <= 1u\n",
      "voltage V1 a gnd formula(5*(1-exp(-t/2u))*sin(2*pi*1M*t))\n",
      "couple T1 (Lp, Ls) k=0.98\n",
      "vcvs Av1 p n control=(cp, cn) gain=10\n",
      "trials runs=100 seed=1 spread=corners yield=99%\nmodes\nfrequency from=1 to=1M input=V1\n",
      "include \"x.rlc\"\n",
      "voltage V1 a gnd samples(\"f.csv\", time=1, value=2, scale=1)\n",
      "block b (x, y)\n  block_param = 2\nend\n",
  };
  for (const char* t : texts) {
    const std::string once = fmt(t);
    EXPECT_EQ(fmt(once), once) << t;
  }
}

}  // namespace
}  // namespace ringdown
