// DC solves G x = B u of small networks against Ohm's and Kirchhoff's laws
// worked by hand, and the output maps (element, part, capacitance and
// inductance signals), including KCL at every node through element_current.
#include <gtest/gtest.h>

#include <cmath>

#include "mna/descriptor.hpp"
#include "tests/mna/builder.hpp"

namespace ringdown {
namespace {

using mna_testing::CircuitBuilder;

struct Solved {
  mna::Network network;
  Eigen::VectorXd x;
  Eigen::VectorXd u;
};

Eigen::VectorXd inputs_before_zero(const Circuit& circuit, const mna::Network& network) {
  Eigen::VectorXd u(network.inputs());
  for (int j = 0; j < network.inputs(); ++j) {
    u(j) = circuit.elements[static_cast<std::size_t>(network.input_elements()[static_cast<std::size_t>(j)])]
               .waveform->value_before_zero();
  }
  return u;
}

Solved dc(Circuit& circuit) {
  Diagnostics diagnostics;
  auto network = mna::Network::analyse(circuit, false, diagnostics);
  EXPECT_TRUE(network.has_value());
  for (const auto& d : diagnostics) ADD_FAILURE() << "unexpected: " << d.message;
  mna::Descriptor d = network->stamp(circuit, network->initial_switches());
  Eigen::VectorXd u = inputs_before_zero(circuit, *network);
  Eigen::VectorXd x = d.G.fullPivLu().solve(d.B * u);
  EXPECT_LT((d.G * x - d.B * u).norm(), 1e-12 * (1 + (d.B * u).norm()));
  return {*network, x, u};
}

double apply(const mna::LinearMap& map, const Solved& s) {
  // At DC x' = 0, so dx_row does not contribute.
  return map.x_row.dot(s.x) + map.u_row.dot(s.u);
}

// Kirchhoff's current law (physical law): at every node the element currents
// leaving it sum to zero.
void expect_kcl(const Circuit& circuit, const Solved& s) {
  for (int v = 1; v < static_cast<int>(circuit.nodes.size()); ++v) {
    double leaving = 0, scale = 0;
    for (int e = 0; e < static_cast<int>(circuit.elements.size()); ++e) {
      const Element& x = circuit.elements[static_cast<std::size_t>(e)];
      const double i = apply(s.network.element_current(circuit, e), s);
      if (x.a == v) leaving += i;
      if (x.b == v) leaving -= i;
      scale += std::abs(i);
    }
    EXPECT_NEAR(leaving, 0, 1e-12 * (1 + scale)) << "node " << circuit.nodes[static_cast<std::size_t>(v)].name;
  }
}

// Mixed circuit of stamp_test: V1 5 V, R1 2 Ohm, L1 (a DC short), C1 (open),
// I1 0.5 A out of `out`. By hand: iL = 0.5 A, v(mid) = v(out) = 5 - 2*0.5 = 4 V,
// and V1 delivers 0.5 A, i.e. i(V1) = -0.5 A in the passive convention.
TEST(Dc, MixedCircuitByHand) {
  CircuitBuilder b;
  b.voltage("V1", "in", "gnd", 5);
  b.resistor("R1", "in", "mid", 2);
  b.inductor("L1", "mid", "out", 3);
  b.capacitor("C1", "out", "gnd", 4);
  b.current("I1", "out", "gnd", 0.5);
  Circuit& c = b.circuit();
  Solved s = dc(c);
  EXPECT_NEAR(apply(s.network.node_voltage(c.find_node("out")), s), 4, 1e-12);
  EXPECT_NEAR(apply(s.network.node_voltage(c.find_node("mid")), s), 4, 1e-12);
  EXPECT_NEAR(apply(s.network.element_current(c, b.element("V1")), s), -0.5, 1e-12);
  EXPECT_NEAR(apply(s.network.element_current(c, b.element("L1")), s), 0.5, 1e-12);
  EXPECT_NEAR(apply(s.network.element_current(c, b.element("R1")), s), 0.5, 1e-12);
  EXPECT_NEAR(apply(s.network.element_current(c, b.element("I1")), s), 0.5, 1e-12);
  EXPECT_NEAR(apply(s.network.part_voltage(c, b.part("R1")), s), 1, 1e-12);
  EXPECT_EQ(apply(s.network.node_voltage(kGround), s), 0);
  expect_kcl(c, s);
  // The capacitor's current is C d(va - vb)/dt: only dx_row, weight 4 on v(out).
  mna::LinearMap ic = s.network.element_current(c, b.element("C1"));
  EXPECT_EQ(ic.x_row.norm(), 0);
  EXPECT_EQ(ic.dx_row(s.network.node_unknown(c.find_node("out"))), 4);
  // Tellegen's theorem (Tellegen 1952, from memory): sum of v*i over all branches is 0.
  double power = 0;
  for (int p = 0; p < static_cast<int>(c.parts.size()); ++p) {
    power += apply(s.network.part_voltage(c, p), s) * apply(s.network.part_current(c, p), s);
  }
  EXPECT_NEAR(power, 0, 1e-12);
}

// Voltage divider with a negative resistance: v = V R2 / (R1 + R2) (Ohm's law).
TEST(Dc, NegativeResistanceDivider) {
  CircuitBuilder b;
  b.voltage("V1", "a", "gnd", 1);
  b.resistor("R1", "a", "b", 1);
  b.resistor("R2", "b", "gnd", -2);
  Circuit& c = b.circuit();
  Solved s = dc(c);
  EXPECT_NEAR(apply(s.network.node_voltage(c.find_node("b")), s), -2.0 / (1 - 2), 1e-12);
  expect_kcl(c, s);
}

// Controlled sources, each worked by hand (definitions of NETLIST.md section 4).
TEST(Dc, ControlledSourcesByHand) {
  CircuitBuilder b;
  b.voltage("V1", "in", "gnd", 2);
  b.resistor("Rin", "in", "gnd", 10);             // with Rl below: i(V1) = -0.2 - 2 A
  b.vcvs("E1", "e", "gnd", "in", "gnd", 10);      // v(e) = 20 V
  b.resistor("Re", "e", "gnd", 1e3);
  b.vccs("G1", "g", "gnd", "in", "gnd", 2e-3);    // 4 mA leaves g into G1: v(g) = -4 V on 1k
  b.resistor("Rg", "g", "gnd", 1e3);
  b.ccvs("H1", "h", "gnd", "V1", 50);             // v(h) = 50 * i(V1) = -110 V
  b.resistor("Rh", "h", "gnd", 1e3);
  b.resistor("Rl", "in", "m", 1);                 // i(L1) = 2 A (L shorts m to gnd)
  b.inductor("L1", "m", "gnd", 1e-3);
  b.cccs("F1", "f", "gnd", "L1", 0.5);            // 1 A leaves f into F1: v(f) = -3 V on 3 Ohm
  b.resistor("Rf", "f", "gnd", 3);
  Circuit& c = b.circuit();
  Solved s = dc(c);
  auto v = [&](const char* node) { return apply(s.network.node_voltage(c.find_node(node)), s); };
  EXPECT_NEAR(v("e"), 20, 1e-12);
  EXPECT_NEAR(v("g"), -4, 1e-12);
  EXPECT_NEAR(apply(s.network.element_current(c, b.element("V1")), s), -0.2 - 2, 1e-12);
  EXPECT_NEAR(v("h"), 50 * (-2.2), 1e-11);
  EXPECT_NEAR(v("f"), -3, 1e-12);
  EXPECT_NEAR(apply(s.network.element_current(c, b.element("G1")), s), 4e-3, 1e-15);
  EXPECT_NEAR(apply(s.network.element_current(c, b.element("F1")), s), 1, 1e-12);
  expect_kcl(c, s);
}

// Switch as a resistance: closed 10 mOhm / open 100 MOhm into 1 Ohm (Ohm's law).
TEST(Dc, SwitchStatesByHand) {
  CircuitBuilder b;
  b.voltage("V1", "a", "gnd", 1);
  b.switch_("S1", "a", "b", make_constant(1), 0.01, 1e8);
  b.resistor("R1", "b", "gnd", 1);
  Circuit& c = b.circuit();
  Solved s = dc(c);
  EXPECT_NEAR(apply(s.network.node_voltage(c.find_node("b")), s), 1 / 1.01, 1e-12);
  EXPECT_NEAR(apply(s.network.element_current(c, b.element("S1"), {true}), s), 1 / 1.01, 1e-12);
  expect_kcl(c, s);
  // Open: the switch current map uses 1/open.
  mna::Descriptor d = s.network.stamp(c, {false});
  Eigen::VectorXd x = d.G.fullPivLu().solve(d.B * s.u);
  const double i_open = s.network.element_current(c, b.element("S1"), {false}).x_row.dot(x);
  EXPECT_NEAR(i_open, 1 / (1e8 + 1), 1e-20);
  EXPECT_NEAR(s.network.part_current(c, b.part("S1"), {false}).x_row.dot(x), i_open, 1e-22);
}

// Hidden parts: a capacitor with esr and an inductor with dcr and rpar.
// C1.vc is the voltage on the capacitance; L1.il the current in the inductance;
// X.i sums the terminal elements (NETLIST.md section 4).
TEST(Dc, HiddenPartsAndPartSignals) {
  CircuitBuilder b;
  b.voltage("V1", "a", "gnd", 10);
  b.inductor("L1", "a", "b", 1e-6, /*dcr=*/1, /*rpar=*/100);
  b.resistor("R1", "b", "gnd", 4);
  b.capacitor("C1", "b", "gnd", 1e-6, /*esr=*/0.5);
  Circuit& c = b.circuit();
  Solved s = dc(c);
  // DC: L1's branch is dcr = 1 Ohm in parallel with rpar = 100 Ohm, then R1 = 4 Ohm.
  const double r_par = 1.0 * 100.0 / 101.0;
  const double i_total = 10 / (r_par + 4);
  const double v_b = 4 * i_total;
  EXPECT_NEAR(apply(s.network.node_voltage(c.find_node("b")), s), v_b, 1e-12);
  EXPECT_NEAR(apply(s.network.part_current(c, b.part("L1")), s), i_total, 1e-12);
  EXPECT_NEAR(apply(s.network.inductance_current(c, b.part("L1")), s), (10 - v_b) / 1.0, 1e-12);
  EXPECT_NEAR(apply(s.network.part_voltage(c, b.part("L1")), s), 10 - v_b, 1e-12);
  // No DC current in C1, so its capacitance holds v(b).
  EXPECT_NEAR(apply(s.network.capacitance_voltage(c, b.part("C1")), s), v_b, 1e-12);
  // C1.i = C d(vc)/dt: a derivative map over C1's own nodes (b and C1#1).
  mna::LinearMap ic = s.network.part_current(c, b.part("C1"));
  EXPECT_EQ(ic.dx_row(s.network.node_unknown(c.find_node("b"))), 1e-6);
  EXPECT_EQ(ic.dx_row(s.network.node_unknown(c.find_node("C1#1"))), -1e-6);
  expect_kcl(c, s);
}

}  // namespace
}  // namespace ringdown
