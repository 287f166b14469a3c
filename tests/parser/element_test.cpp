// Elements, hidden parts, blocks and hierarchical names (NETLIST.md sections
// 4 and 6).
#include <gtest/gtest.h>

#include <cmath>
#include <numbers>

#include "parser_test_util.hpp"

namespace ringdown {
namespace {

using testing::all_messages;
using testing::element;
using testing::expect_error;
using testing::expect_warning;
using testing::load;

const Part& part(const Circuit& c, const std::string& name) {
  const int k = c.find_part(name);
  EXPECT_GE(k, 0) << name;
  return c.parts.at(static_cast<std::size_t>(k < 0 ? 0 : k));
}

TEST(Element, Resistor) {
  auto r = load("resistor R1 a gnd 4k7 tol=1% rated=250mW\nresistor R2 a gnd 1k\n");
  ASSERT_TRUE(r.ok()) << all_messages(r);
  const Circuit& c = *r.circuit;
  EXPECT_EQ(c.nodes[0].name, "gnd");
  const Element& e = element(c, "R1");
  EXPECT_EQ(e.kind, ElementKind::Resistor);
  EXPECT_DOUBLE_EQ(e.value, 4700);
  EXPECT_EQ(c.nodes[e.a].name, "a");
  EXPECT_EQ(e.b, kGround);
  EXPECT_DOUBLE_EQ(*part(c, "R1").tol, 0.01);
  EXPECT_DOUBLE_EQ(*part(c, "R1").rated, 0.25);
  EXPECT_EQ(e.where.line, 1);
}

TEST(Element, ResistorZeroSuggestsJoiningNodes) {
  auto r = load("resistor R1 a b 0\n");
  expect_error(r, 1, 17, "a resistance of 0 is not allowed", "join the two nodes");
}

TEST(Element, NegativeResistorWarns) {
  auto r = load("resistor R1 a gnd -50\nresistor R2 a gnd 1k\n");
  ASSERT_TRUE(r.ok()) << all_messages(r);
  expect_warning(r, 1, "negative resistance");
  EXPECT_EQ(r.circuit->warnings.size(), 1u);
}

TEST(Element, ImplausibleValuesWarnWithSiValue) {
  auto r = load("capacitor C1 a gnd 2.2F\ninductor L1 a gnd 22H\nresistor R1 a gnd 1e-7\n"
                "resistor R2 a gnd 2e12\n");
  ASSERT_TRUE(r.ok()) << all_messages(r);
  expect_warning(r, 1, "implausibly large for a capacitor");
  expect_warning(r, 2, "implausibly large for an inductor");
  expect_warning(r, 3, "R1 = ");
  expect_warning(r, 4, "R2 = ");
  EXPECT_NE(testing::find_diagnostic(r, "R2 = ")->message.find("implausible for a resistor"),
            std::string::npos);
  EXPECT_NE(testing::find_diagnostic(r, "capacitor")->message.find(format_si(2.2, "F")),
            std::string::npos);
}

TEST(Element, ExpressionNeedsParentheses) {
  auto r = load("Rb = 1k\nresistor R1 a gnd 2*Rb\n");
  expect_error(r, 2, 19, "must be in parentheses", "write (2*Rb)");
}

TEST(Element, GroundIsGnd) {
  auto r = load("resistor R1 a 0 1k\n");
  expect_error(r, 1, 15, "the ground node is written 'gnd'", "gnd");
}

TEST(Element, DuplicateName) {
  auto r = load("resistor R1 a gnd 1k\nresistor R1 a gnd 2k\n");
  expect_error(r, 2, 10, "the name 'R1' is already used", "first used at line 1");
}

TEST(Element, WrongUnitNamesBothUnits) {
  auto r = load("resistor R1 a gnd 10uF\n");
  expect_error(r, 1, 19, "is in F (capacitance), but a resistance is in Ohm");
}

TEST(Element, UnknownAttributeListsValidOnes) {
  auto r = load("resistor R1 a gnd 1k tolerance=1%\n");
  expect_error(r, 1, 22, "unknown attribute 'tolerance'; valid: tol, rated");
}

TEST(Element, MissingValue) {
  auto r = load("resistor R1 a gnd\n");
  expect_error(r, 1, 0, "expected a value");
}

TEST(Element, CapacitorHiddenParts) {
  auto r = load("capacitor C1 a gnd 22u v0=12V esr=15m esl=2n tol=10% rated=50V\nresistor R a gnd 1k\n");
  ASSERT_TRUE(r.ok()) << all_messages(r);
  const Circuit& c = *r.circuit;
  const Part& p = part(c, "C1");
  ASSERT_EQ(p.elements.size(), 3u);
  const Element& esr = element(c, "C1.esr");
  const Element& esl = element(c, "C1.esl");
  const Element& cap = element(c, "C1");
  EXPECT_TRUE(esr.hidden);
  EXPECT_TRUE(esl.hidden);
  EXPECT_EQ(esr.kind, ElementKind::Resistor);
  EXPECT_EQ(esl.kind, ElementKind::Inductor);
  EXPECT_DOUBLE_EQ(esr.value, 15e-3);
  EXPECT_DOUBLE_EQ(esl.value, 2e-9);
  // Series chain a - esr - C1#1 - esl - C1#2 - C - gnd.
  EXPECT_EQ(c.nodes[esr.a].name, "a");
  EXPECT_EQ(c.nodes[esr.b].name, "C1#1");
  EXPECT_TRUE(c.nodes[esr.b].hidden);
  EXPECT_EQ(esl.a, esr.b);
  EXPECT_EQ(c.nodes[esl.b].name, "C1#2");
  EXPECT_EQ(cap.a, esl.b);
  EXPECT_EQ(cap.b, kGround);
  EXPECT_EQ(c.elements[p.main].name, "C1");
  ASSERT_EQ(p.terminal.size(), 1u);
  EXPECT_EQ(c.elements[p.terminal[0]].name, "C1.esr");
  EXPECT_EQ(p.a, esr.a);
  EXPECT_DOUBLE_EQ(*cap.v0, 12);
  EXPECT_DOUBLE_EQ(*p.tol, 0.1);
  EXPECT_DOUBLE_EQ(*p.rated, 50);
}

TEST(Element, InductorHiddenParts) {
  auto r = load("inductor L1 a gnd 10u i0=2A dcr=30m rpar=10k srf=20MHz tol=20% rated=3A\n"
                "resistor R a gnd 1k\n");
  ASSERT_TRUE(r.ok()) << all_messages(r);
  const Circuit& c = *r.circuit;
  const Part& p = part(c, "L1");
  const Element& l = element(c, "L1");
  const Element& dcr = element(c, "L1.dcr");
  const Element& rpar = element(c, "L1.rpar");
  const Element& srf = element(c, "L1.srf");
  EXPECT_EQ(c.nodes[l.a].name, "a");
  EXPECT_EQ(c.nodes[l.b].name, "L1#1");
  EXPECT_EQ(dcr.a, l.b);
  EXPECT_EQ(dcr.b, kGround);
  EXPECT_DOUBLE_EQ(dcr.value, 0.03);
  EXPECT_EQ(rpar.a, l.a);
  EXPECT_EQ(rpar.b, kGround);
  EXPECT_EQ(srf.kind, ElementKind::Capacitor);
  // C = 1/((2 pi f)^2 L): the LC resonance condition (Thomson's formula).
  const double w = 2 * std::numbers::pi * 20e6;
  EXPECT_NEAR(srf.value, 1 / (w * w * 10e-6), 1e-24);
  EXPECT_EQ(srf.a, l.a);
  ASSERT_EQ(p.terminal.size(), 3u);
  for (int t : p.terminal) EXPECT_EQ(c.elements[t].a, p.a);
  EXPECT_DOUBLE_EQ(*l.i0, 2);
  EXPECT_EQ(p.main, c.find_element("L1"));
}

TEST(Element, Sources) {
  auto r = load("voltage V1 p gnd 12V\ncurrent I1 p gnd 2mA\nresistor R p gnd 1k\n");
  ASSERT_TRUE(r.ok()) << all_messages(r);
  EXPECT_DOUBLE_EQ(element(*r.circuit, "V1").waveform->value(1.0), 12);
  EXPECT_DOUBLE_EQ(element(*r.circuit, "I1").waveform->value(1.0), 2e-3);
  auto bad = load("voltage V1 p gnd 2A\n");
  expect_error(bad, 1, 18, "is in A (current), but a voltage source's value is in V");
}

TEST(Element, ControlledSources) {
  auto r = load(
      "voltage Vsns a b 0\nresistor R1 b gnd 1\nvoltage V1 a gnd 1\n"
      "vcvs Av1 p gnd control=(a, b) gain=10\nresistor R2 p gnd 1k\n"
      "vccs Gm1 q gnd control=(a, gnd) gain=2mS\nresistor R3 q gnd 1k\n"
      "ccvs Rm1 s gnd through=Vsns gain=50Ohm\nresistor R4 s gnd 1k\n"
      "cccs Ai1 u gnd through=Lk gain=0.5\nresistor R5 u gnd 1k\ninductor Lk a gnd 1m\n"
      "cccs Ai2 w gnd through=Av1 gain=2\nresistor R6 w gnd 1k\n");
  ASSERT_TRUE(r.ok()) << all_messages(r);
  const Circuit& c = *r.circuit;
  const Element& av = element(c, "Av1");
  EXPECT_EQ(av.kind, ElementKind::Vcvs);
  EXPECT_DOUBLE_EQ(av.value, 10);
  EXPECT_EQ(c.nodes[av.control_p].name, "a");
  EXPECT_EQ(c.nodes[av.control_n].name, "b");
  EXPECT_DOUBLE_EQ(element(c, "Gm1").value, 2e-3);
  EXPECT_EQ(element(c, "Rm1").through, c.find_element("Vsns"));
  EXPECT_EQ(element(c, "Ai1").through, c.find_element("Lk"));  // forward reference
  EXPECT_EQ(element(c, "Ai2").through, c.find_element("Av1"));
}

TEST(Element, ThroughMustNameAVoltageOutput) {
  auto r = load("resistor R1 a gnd 1\ncccs A1 a gnd through=R1 gain=1\n");
  expect_error(r, 2, 23, "through= must name a voltage source, an inductor or a vcvs/ccvs");
  auto r2 = load("voltage Vsense a gnd 1\ncccs A1 a gnd through=Vsens gain=1\n");
  expect_error(r2, 2, 23, "through=Vsens names no element", "did you mean 'Vsense'?");
}

TEST(Element, ControlledSourceUnits) {
  auto r = load("vccs G1 a gnd control=(a, gnd) gain=2Ohm\nresistor R a gnd 1\n");
  expect_error(r, 1, 37, "but a transconductance is in S");
  auto r2 = load("vcvs E1 a gnd control=(a) gain=1\nresistor R a gnd 1\n");
  expect_error(r2, 1, 23, "control=(cp, cn) with two nodes is required");
  auto r3 = load("vcvs E1 a gnd control=(a, gnd)\nresistor R a gnd 1\n");
  expect_error(r3, 1, 1, "gain= is required");
}

TEST(Element, Couple) {
  auto r = load("inductor Lp a gnd 1m\ninductor Ls b gnd 4m\ncouple T1 (Lp, Ls) k=0.98\n"
                "resistor R1 a gnd 1\nresistor R2 b gnd 1\n");
  ASSERT_TRUE(r.ok()) << all_messages(r);
  ASSERT_EQ(r.circuit->couplings.size(), 1u);
  const Coupling& k = r.circuit->couplings[0];
  EXPECT_EQ(k.name, "T1");
  EXPECT_DOUBLE_EQ(k.k, 0.98);
  ASSERT_EQ(k.inductors.size(), 2u);
  EXPECT_EQ(k.inductors[0], r.circuit->find_element("Lp"));
  EXPECT_EQ(k.inductors[1], r.circuit->find_element("Ls"));
}

TEST(Element, CoupleErrors) {
  auto r = load("inductor Lp a gnd 1m\ninductor Ls b gnd 4m\ncouple T1 (Lp, Ls) k=1\n"
                "resistor R1 a gnd 1\nresistor R2 b gnd 1\n");
  expect_error(r, 3, 22, "k must satisfy 0 < |k| < 1");
  auto r2 = load("inductor Lp a gnd 1m\nresistor Rs b gnd 4\ncouple T1 (Lp, Rs) k=0.5\n"
                 "resistor R1 a gnd 1\n");
  expect_error(r2, 3, 16, "'Rs' is a resistor, not an inductor");
}

TEST(Element, Switch) {
  auto r = load("voltage V1 a gnd 5\nswitch S1 a b gate=step(from=1, to=0, at=10u) closed=50m open=1G\n"
                "switch S2 b gnd gate=1\nresistor R b gnd 1k\n");
  ASSERT_TRUE(r.ok()) << all_messages(r);
  const Element& s = element(*r.circuit, "S1");
  EXPECT_EQ(s.kind, ElementKind::Switch);
  EXPECT_DOUBLE_EQ(s.closed, 0.05);
  EXPECT_DOUBLE_EQ(s.open, 1e9);
  EXPECT_DOUBLE_EQ(s.waveform->value(0), 1);
  EXPECT_DOUBLE_EQ(s.waveform->value(1), 0);
  const Element& s2 = element(*r.circuit, "S2");
  EXPECT_DOUBLE_EQ(s2.closed, 1e-3);  // default closed=1m
  EXPECT_DOUBLE_EQ(s2.open, 1e9);     // default open=1G
  auto bad = load("switch S1 a gnd closed=1\nresistor R a gnd 1\n");
  expect_error(bad, 1, 1, "gate=WAVEFORM is required");
  auto bad2 = load("switch S1 a gnd gate=5V\nresistor R a gnd 1\n");
  expect_error(bad2, 1, 22, "but a gate (a plain number) is in");
}

TEST(Element, NodeWarnings) {
  auto r = load("voltage V1 a gnd 1\nresistor R1 a b 1k\nresistor R2 c c 1k\nresistor R3 c gnd 1\n");
  ASSERT_TRUE(r.ok()) << all_messages(r);
  expect_warning(r, 2, "node 'b' is connected to only one element (R1)");
  expect_warning(r, 3, "both ends are on node 'c'");
}

TEST(Block, HierarchicalNamesAndParameters) {
  auto r = load(
      "R = 1\n"
      "use rc SN1 (drain, gnd) R=100 C=(Cbase*2)\n"
      "Cbase = 10n\n"
      "voltage V1 drain gnd 1\n"
      "block rc (a, b)  R=47  C=1n\n"
      "  Rx = R*2\n"
      "  resistor  R1 a mid (Rx)\n"
      "  capacitor C1 mid b C\n"
      "end\n"
      "use rc SN2 (drain, gnd)\n");
  ASSERT_TRUE(r.ok()) << all_messages(r);
  const Circuit& c = *r.circuit;
  EXPECT_DOUBLE_EQ(element(c, "SN1.R1").value, 200);   // block parameter shadows global R
  EXPECT_DOUBLE_EQ(element(c, "SN1.C1").value, 20e-9); // argument evaluated in caller scope
  EXPECT_DOUBLE_EQ(element(c, "SN2.R1").value, 94);    // default
  EXPECT_GE(c.find_node("SN1.mid"), 0);
  EXPECT_GE(c.find_node("SN2.mid"), 0);
  EXPECT_EQ(element(c, "SN1.R1").a, c.find_node("drain"));
  EXPECT_EQ(element(c, "SN1.C1").b, kGround);
  bool found = false;
  for (const Parameter& p : c.parameters) found |= p.name == "SN1.Rx" && p.value == 200;
  EXPECT_TRUE(found);
}

TEST(Block, Nesting) {
  auto r = load(
      "block inner (x, y) R=1\n  resistor R1 x y R\nend\n"
      "block outer (a, b) R=2\n  use inner I1 (a, m) R=(R*10)\n  resistor R2 m b 1\nend\n"
      "use outer O1 (p, gnd)\nvoltage V p gnd 1\n");
  ASSERT_TRUE(r.ok()) << all_messages(r);
  EXPECT_DOUBLE_EQ(element(*r.circuit, "O1.I1.R1").value, 20);
  EXPECT_EQ(element(*r.circuit, "O1.I1.R1").b, r.circuit->find_node("O1.m"));
}

TEST(Block, Errors) {
  auto r = load("block rc (a, b) R=1\n  resistor R1 a b R\nend\nuse rcc X1 (p, gnd)\n");
  expect_error(r, 4, 5, "unknown block 'rcc'", "did you mean 'rc'?");
  auto r2 = load("block rc (a, b) R=1\n  resistor R1 a b R\nend\nuse rc X1 (p, gnd) Rr=2\nresistor R p gnd 1\n");
  expect_error(r2, 4, 20, "has no parameter 'Rr'", "did you mean 'R'?");
  auto r3 = load("block rc (a, b)\n  resistor R1 a b 1\nend\nuse rc X1 (p)\n");
  expect_error(r3, 4, 11, "has 2 ports (a, b), not 1");
  auto r4 = load("block rc (a, b)\n  resistor R1 a b 1\n");
  expect_error(r4, 1, 1, "block 'rc' has no 'end'");
  auto r5 = load("end\n");
  expect_error(r5, 1, 1, "'end' without a block");
  auto r6 = load("block self (a, b)\n  use self X (a, b)\nend\nuse self Y (p, gnd)\n");
  expect_error(r6, 2, 7, "block 'self' uses itself: self -> self");
  auto r7 = load("block b1 (a, b)\n  transient until=1m\nend\n");
  expect_error(r7, 2, 3, "'transient' is not allowed inside a block");
}

TEST(Parse, ContinuationWhileParenthesisIsOpen) {
  auto r = load("voltage V1 a gnd (12V +\n    sine(amp=0.5V,   # ripple\n         freq=100k))\nresistor R a gnd 1\n");
  ASSERT_TRUE(r.ok()) << all_messages(r);
  EXPECT_NEAR(element(*r.circuit, "V1").waveform->value(2.5e-6), 12.5, 1e-9);
}

TEST(Parse, UnclosedParenthesisDoesNotSwallowTheFile) {
  auto r = load("voltage V1 a gnd (12V\nresistor R1 a gnd 1k\nresistor R2 a gnd 0\n");
  expect_error(r, 1, 18, "this '(' is never closed");
  expect_error(r, 3, 19, "a resistance of 0");
}

TEST(Parse, EveryErroneousLineIsReportedInFileOrder) {
  auto r = load("resistor R1 a 0 1k\nx = 1meg\nresistor R2 a b 2*x\nfoo bar\nresistor R3 a gnd 1k\n"
                "record nowhere\n");
  EXPECT_FALSE(r.ok());
  std::vector<int> lines;
  for (const Diagnostic& d : r.diagnostics) {
    if (d.severity == Severity::Error) lines.push_back(d.where.line);
  }
  EXPECT_EQ(lines, (std::vector<int>{1, 2, 3, 4, 6})) << all_messages(r);
  expect_error(r, 4, 1, "unknown statement 'foo'");
}

TEST(Parse, UnknownStatementSuggests) {
  auto r = load("resistr R1 a gnd 1k\n");
  expect_error(r, 1, 1, "unknown statement 'resistr'", "did you mean 'resistor'?");
}

TEST(Parse, SyntaxErrorPosition) {
  auto r = load("voltage V1 a gnd step(from=1, to=)\n");
  expect_error(r, 1, 34, "expected an expression");
  EXPECT_EQ(r.diagnostics[0].where.source_line, "voltage V1 a gnd step(from=1, to=)");
}

TEST(Parse, Title) {
  auto r = load("title \"My # circuit\"  # comment\nresistor R1 a gnd 1\n");
  ASSERT_TRUE(r.ok()) << all_messages(r);
  EXPECT_EQ(r.circuit->title, "My # circuit");
  auto bad = load("title My\n");
  expect_error(bad, 1, 1, "title needs one text in double quotes");
}

}  // namespace
}  // namespace ringdown
