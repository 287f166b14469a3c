// Topology checks of mna::Network::analyse: each error names the right
// elements, in file order, at the first one's position, with a hint; floating
// subnetworks are tied to gnd with a warning (an error when strict).
// Expected element sets are worked out by hand from the circuit graphs
// (cut and loop definitions: any graph theory text, e.g. Chua, Desoer & Kuh,
// Linear and Nonlinear Circuits 1987, from memory).
#include <gmock/gmock.h>
#include <gtest/gtest.h>

#include "mna/descriptor.hpp"
#include "tests/mna/builder.hpp"

namespace ringdown {
namespace {

using ::testing::HasSubstr;
using ::testing::Not;
using mna_testing::CircuitBuilder;

struct Outcome {
  std::optional<mna::Network> network;
  Diagnostics diagnostics;
  std::vector<Diagnostic> errors() const {
    std::vector<Diagnostic> e;
    for (const auto& d : diagnostics) {
      if (d.severity == Severity::Error) e.push_back(d);
    }
    return e;
  }
};

Outcome analyse(CircuitBuilder& b, bool strict = false) {
  Outcome o;
  o.network = mna::Network::analyse(b.circuit(), strict, o.diagnostics);
  return o;
}

int line_of(CircuitBuilder& b, const std::string& element) {
  return b.circuit().elements[static_cast<std::size_t>(b.element(element))].where.line;
}

TEST(Topology, ParallelVoltageSourcesFormALoop) {
  CircuitBuilder b;
  b.resistor("R1", "a", "gnd", 1);
  b.voltage("V1", "a", "gnd", 1);
  b.voltage("V2", "a", "gnd", 1);
  Outcome o = analyse(b);
  EXPECT_FALSE(o.network);
  ASSERT_EQ(o.errors().size(), 1u);
  EXPECT_THAT(o.errors()[0].message, HasSubstr("V1, V2 form a loop"));
  EXPECT_EQ(o.errors()[0].where.line, line_of(b, "V1"));
  EXPECT_EQ(o.errors()[0].where.file, "test.rlc");
  EXPECT_THAT(o.errors()[0].hint, HasSubstr("resistor in series"));
}

TEST(Topology, LoopThroughVcvsAndCcvs) {
  CircuitBuilder b;
  b.voltage("V1", "a", "gnd", 1);
  b.resistor("R1", "a", "c", 1);
  b.vcvs("E1", "a", "b", "c", "gnd", 2);
  b.ccvs("H1", "b", "gnd", "V1", 3);
  b.resistor("R2", "b", "c", 1);
  Outcome o = analyse(b);
  EXPECT_FALSE(o.network);
  ASSERT_EQ(o.errors().size(), 1u);
  EXPECT_THAT(o.errors()[0].message, HasSubstr("V1, E1, H1 form a loop"));
}

TEST(Topology, NodeReachedOnlyThroughCurrentSources) {
  CircuitBuilder b;
  b.voltage("V1", "in", "gnd", 1);
  b.resistor("R1", "in", "gnd", 1);
  b.current("I1", "in", "x", 1e-3);
  b.vccs("G1", "x", "gnd", "in", "gnd", 1e-3);
  Outcome o = analyse(b);
  EXPECT_FALSE(o.network);
  ASSERT_EQ(o.errors().size(), 1u);
  EXPECT_THAT(o.errors()[0].message, HasSubstr("I1, G1 form a cut on their own: node x"));
  EXPECT_EQ(o.errors()[0].where.line, line_of(b, "I1"));
  EXPECT_THAT(o.errors()[0].hint, HasSubstr("add a resistor"));
}

TEST(Topology, CutOfCurrentSourcesAroundASubnetwork) {
  // {x, y} joined by R2 reach the rest only through I1 and F1.
  CircuitBuilder b;
  b.voltage("V1", "in", "gnd", 1);
  b.resistor("R1", "in", "gnd", 1);
  b.current("I1", "gnd", "x", 1e-3);
  b.resistor("R2", "x", "y", 1);
  b.cccs("F1", "y", "in", "V1", 0.1);
  Outcome o = analyse(b);
  ASSERT_EQ(o.errors().size(), 1u);
  EXPECT_THAT(o.errors()[0].message, HasSubstr("I1, F1 form a cut on their own: nodes x, y"));
}

TEST(Topology, CapacitorAcrossVoltageSourceIsIndexTwo) {
  CircuitBuilder b;
  b.voltage("V1", "a", "gnd", 1);
  b.capacitor("C1", "a", "b", 1e-6);
  b.capacitor("C2", "b", "gnd", 1e-6);
  b.resistor("R1", "b", "gnd", 1);
  Outcome o = analyse(b);
  EXPECT_FALSE(o.network);
  ASSERT_EQ(o.errors().size(), 1u);
  EXPECT_THAT(o.errors()[0].message, HasSubstr("V1, C1, C2 form a loop"));
  EXPECT_THAT(o.errors()[0].message, HasSubstr("index-2"));
  EXPECT_THAT(o.errors()[0].hint, HasSubstr("esr="));
  EXPECT_THAT(o.errors()[0].hint, HasSubstr("C1"));
  EXPECT_EQ(o.errors()[0].where.line, line_of(b, "V1"));
}

TEST(Topology, EsrBreaksTheCapacitorLoop) {
  CircuitBuilder b;
  b.voltage("V1", "a", "gnd", 1);
  b.capacitor("C1", "a", "gnd", 1e-6, /*esr=*/10e-3);
  Outcome o = analyse(b);
  EXPECT_TRUE(o.network);
  EXPECT_TRUE(o.diagnostics.empty());
}

TEST(Topology, LoopOfCapacitorsAloneIsAccepted) {
  CircuitBuilder b;
  b.voltage("V1", "in", "gnd", 1);
  b.resistor("R1", "in", "a", 1);
  b.capacitor("C1", "a", "b", 1e-6);
  b.capacitor("C2", "b", "gnd", 1e-6);
  b.capacitor("C3", "a", "gnd", 1e-6);
  b.resistor("R2", "b", "gnd", 1);
  Outcome o = analyse(b);
  EXPECT_TRUE(o.network);
  EXPECT_TRUE(o.diagnostics.empty());
}

TEST(Topology, InductorInSeriesWithCurrentSourceIsIndexTwo) {
  CircuitBuilder b;
  b.current("I1", "gnd", "x", 1);
  b.inductor("L1", "x", "gnd", 1e-3);
  Outcome o = analyse(b);
  EXPECT_FALSE(o.network);
  ASSERT_EQ(o.errors().size(), 1u);
  EXPECT_THAT(o.errors()[0].message, HasSubstr("I1, L1 form a cut"));
  EXPECT_THAT(o.errors()[0].hint, HasSubstr("rpar="));
  EXPECT_THAT(o.errors()[0].hint, HasSubstr("L1"));
  EXPECT_EQ(o.errors()[0].where.line, line_of(b, "I1"));
}

TEST(Topology, RparBreaksTheInductorCut) {
  CircuitBuilder b;
  b.current("I1", "gnd", "x", 1);
  b.inductor("L1", "x", "gnd", 1e-3, 0, /*rpar=*/1e6);
  Outcome o = analyse(b);
  EXPECT_TRUE(o.network);
  EXPECT_TRUE(o.diagnostics.empty());
}

TEST(Topology, InductorsAloneInACutAreAcceptedAndListed) {
  // Leakage L1 in series with L2: node m touches only inductors.
  CircuitBuilder b;
  b.voltage("V1", "in", "gnd", 1);
  b.resistor("R1", "in", "a", 1);
  b.inductor("L1", "a", "m", 1e-6);
  b.inductor("L2", "m", "gnd", 1e-3);
  Outcome o = analyse(b);
  ASSERT_TRUE(o.network);
  EXPECT_TRUE(o.diagnostics.empty());
  ASSERT_EQ(o.network->inductor_cuts().size(), 1u);
  EXPECT_EQ(o.network->inductor_cuts()[0], (std::vector<int>{b.circuit().find_node("m")}));
}

TEST(Topology, CouplingWithKOfOneIsRejected) {
  CircuitBuilder b;
  b.voltage("V1", "p", "gnd", 1);
  b.resistor("R1", "p", "q", 1);
  b.inductor("L1", "q", "gnd", 1e-3);
  b.inductor("L2", "s", "gnd", 1e-3);
  b.resistor("R2", "s", "gnd", 1);
  b.couple("T1", {"L1", "L2"}, 1.0);
  Outcome o = analyse(b);
  EXPECT_FALSE(o.network);
  ASSERT_EQ(o.errors().size(), 1u);
  EXPECT_THAT(o.errors()[0].message, HasSubstr("couple T1"));
  EXPECT_THAT(o.errors()[0].message, HasSubstr("k = 1, but abs(k) must be below 1"));
  EXPECT_EQ(o.errors()[0].where.line, b.circuit().couplings[0].where.line);
}

TEST(Topology, CouplingsThatTogetherAreNotPositiveDefinite) {
  // Three windings with pairwise k = -0.6: the normalised inductance matrix
  // [1 k k; k 1 k; k k 1] has eigenvalue 1 + 2k = -0.2 < 0 (linear algebra).
  CircuitBuilder b;
  b.voltage("V1", "p", "gnd", 1);
  b.resistor("R1", "p", "a", 1);
  b.inductor("L1", "a", "gnd", 1e-3);
  b.inductor("L2", "s", "gnd", 1e-3);
  b.inductor("L3", "t", "gnd", 1e-3);
  b.resistor("R2", "s", "gnd", 1);
  b.resistor("R3", "t", "gnd", 1);
  b.couple("T12", {"L1", "L2"}, -0.6);
  b.couple("T13", {"L1", "L3"}, -0.6);
  b.couple("T23", {"L2", "L3"}, -0.6);
  Outcome o = analyse(b);
  EXPECT_FALSE(o.network);
  ASSERT_EQ(o.errors().size(), 1u);
  EXPECT_THAT(o.errors()[0].message, HasSubstr("L1, L2, L3"));
  EXPECT_THAT(o.errors()[0].message, HasSubstr("not positive definite"));
}

TEST(Topology, ThroughMustNameABranchCurrent) {
  CircuitBuilder b;
  b.voltage("V1", "p", "gnd", 1);
  b.resistor("R1", "p", "gnd", 1);
  b.cccs("F1", "p", "gnd", "R1", 2);
  Outcome o = analyse(b);
  EXPECT_FALSE(o.network);
  ASSERT_EQ(o.errors().size(), 1u);
  EXPECT_THAT(o.errors()[0].message, HasSubstr("F1: through="));
}

TEST(Topology, ZeroResistanceIsRejected) {
  CircuitBuilder b;
  b.voltage("V1", "p", "gnd", 1);
  b.resistor("R1", "p", "gnd", 0);
  Outcome o = analyse(b);
  EXPECT_FALSE(o.network);
  ASSERT_EQ(o.errors().size(), 1u);
  EXPECT_THAT(o.errors()[0].message, HasSubstr("R1"));
}

// An isolated transformer winding: only `couple` links L2 to the primary.
void isolated_winding(CircuitBuilder& b) {
  b.voltage("V1", "p", "gnd", make_step(0, 1, 1e-6, 0));
  b.resistor("R1", "p", "q", 1);
  b.inductor("L1", "q", "gnd", 1e-3);
  b.inductor("L2", "s1", "s2", 4e-3);
  b.resistor("Rload", "s1", "s2", 100);
  b.couple("T1", {"L1", "L2"}, 0.95);
}

TEST(Topology, FloatingWindingIsTiedWithAWarning) {
  CircuitBuilder b;
  isolated_winding(b);
  Outcome o = analyse(b);
  ASSERT_TRUE(o.network);
  ASSERT_EQ(o.diagnostics.size(), 1u);
  const Diagnostic& w = o.diagnostics[0];
  EXPECT_EQ(w.severity, Severity::Warning);
  EXPECT_THAT(w.message, HasSubstr("nodes s1, s2 (L2, Rload) have no DC path to gnd"));
  EXPECT_THAT(w.message, HasSubstr("hidden 1 GOhm"));
  EXPECT_EQ(w.where.line, line_of(b, "L2"));
  // The tie is stamped by mna (1 nS at s1), not added to the circuit.
  const int s1 = b.circuit().find_node("s1");
  EXPECT_EQ(o.network->tied_nodes(), (std::vector<int>{s1}));
  EXPECT_EQ(b.circuit().elements.size(), 5u);
  mna::Descriptor d = o.network->stamp(b.circuit(), {});
  const int k = o.network->node_unknown(s1);
  EXPECT_DOUBLE_EQ(d.G(k, k), 1.0 / 100 + 1e-9);
  // With the tie, the DC operating point exists: G is regular.
  EXPECT_EQ(d.G.fullPivLu().rank(), d.G.rows());
}

TEST(Topology, FloatingWindingIsAnErrorWhenStrict) {
  CircuitBuilder b;
  isolated_winding(b);
  Outcome o = analyse(b, /*strict=*/true);
  EXPECT_FALSE(o.network);
  ASSERT_EQ(o.errors().size(), 1u);
  EXPECT_THAT(o.errors()[0].message, HasSubstr("nodes s1, s2"));
  EXPECT_THAT(o.errors()[0].message, HasSubstr("--strict"));
}

TEST(Topology, NodeBehindACapacitorOnlyIsFloatingAtDc) {
  // x is reached through C1 and I1 only: no DC path, not a current-source cut.
  CircuitBuilder b;
  b.voltage("V1", "in", "gnd", 1);
  b.resistor("R1", "in", "gnd", 1);
  b.capacitor("C1", "in", "x", 1e-9);
  b.current("I1", "x", "gnd", 1e-3);
  Outcome o = analyse(b);
  ASSERT_TRUE(o.network);
  ASSERT_EQ(o.diagnostics.size(), 1u);
  EXPECT_EQ(o.diagnostics[0].severity, Severity::Warning);
  EXPECT_THAT(o.diagnostics[0].message, HasSubstr("node x (C1, I1) has no DC path"));
}

TEST(Topology, OpenSwitchIsStillADcPath) {
  CircuitBuilder b;
  b.voltage("V1", "in", "gnd", 1);
  b.switch_("S1", "in", "x", make_constant(0));  // open throughout: 1 GOhm
  b.capacitor("C1", "x", "gnd", 1e-9);
  Outcome o = analyse(b);
  ASSERT_TRUE(o.network);
  EXPECT_TRUE(o.diagnostics.empty());
  EXPECT_EQ(o.network->initial_switches(), (mna::SwitchState{false}));
}

TEST(Topology, SeveralErrorsAreAllReported) {
  CircuitBuilder b;
  b.voltage("V1", "a", "gnd", 1);
  b.voltage("V2", "a", "gnd", 2);
  b.current("I1", "gnd", "x", 1);
  b.inductor("L1", "x", "gnd", 1);
  Outcome o = analyse(b);
  EXPECT_FALSE(o.network);
  ASSERT_EQ(o.errors().size(), 2u);
  EXPECT_THAT(o.errors()[0].message, HasSubstr("V1, V2"));
  EXPECT_THAT(o.errors()[1].message, HasSubstr("I1, L1"));
  EXPECT_THAT(o.errors()[1].message, Not(HasSubstr("V1")));
}

}  // namespace
}  // namespace ringdown
