// Stamps of mna::Network against MNA matrices written out by hand for small
// circuits, element by element (modified nodal analysis: Ho, Ruehli &
// Brennan 1975, from memory; sign conventions as in mna/network.cpp), and the
// structural null space of C.
#include <gtest/gtest.h>

#include <cmath>

#include "mna/descriptor.hpp"
#include "tests/mna/builder.hpp"

namespace ringdown {
namespace {

using mna_testing::CircuitBuilder;

mna::Network analysed(Circuit& circuit, Diagnostics* out = nullptr) {
  Diagnostics diagnostics;
  auto network = mna::Network::analyse(circuit, false, diagnostics);
  if (out) *out = diagnostics;
  EXPECT_TRUE(network.has_value());
  for (const auto& d : diagnostics) ADD_FAILURE() << "unexpected: " << d.message;
  return *network;
}

// V1 in-gnd 5 V, R1 in-mid 2 Ohm, L1 mid-out 3 H, C1 out-gnd 4 F, I1 out-gnd 0.5 A.
// Unknowns: v(in), v(mid), v(out), i(V1), i(L1); inputs: V1, I1.
TEST(Stamp, MixedCircuitMatchesHandWrittenMna) {
  CircuitBuilder b;
  b.voltage("V1", "in", "gnd", 5);
  b.resistor("R1", "in", "mid", 2);
  b.inductor("L1", "mid", "out", 3);
  b.capacitor("C1", "out", "gnd", 4);
  b.current("I1", "out", "gnd", 0.5);
  auto network = analysed(b.circuit());
  ASSERT_EQ(network.unknowns(), 5);
  ASSERT_EQ(network.inputs(), 2);
  EXPECT_EQ(network.unknown_names(),
            (std::vector<std::string>{"v(in)", "v(mid)", "v(out)", "i(V1)", "i(L1)"}));
  EXPECT_EQ(network.branch_unknown(b.element("V1")), 3);
  EXPECT_EQ(network.branch_unknown(b.element("L1")), 4);
  EXPECT_EQ(network.branch_unknown(b.element("R1")), -1);
  EXPECT_EQ(network.input_elements(), (std::vector<int>{b.element("V1"), b.element("I1")}));

  mna::Descriptor d = network.stamp(b.circuit(), {});
  Eigen::MatrixXd G(5, 5), C = Eigen::MatrixXd::Zero(5, 5), B = Eigen::MatrixXd::Zero(5, 2);
  // Hand-written MNA: KCL rows (currents leaving), then the V1 and L1 rows.
  G << 0.5, -0.5, 0, 1, 0,   // in:  (vin - vmid)/2 + iV1
      -0.5, 0.5, 0, 0, 1,    // mid: (vmid - vin)/2 + iL1
      0, 0, 0, 0, -1,        // out: -iL1 (+ C1 dv/dt) = -I1
      1, 0, 0, 0, 0,         // V1:  vin = u1
      0, -1, 1, 0, 0;        // L1:  3 diL/dt - (vmid - vout) = 0
  C(2, 2) = 4;
  C(4, 4) = 3;
  B(3, 0) = 1;
  B(2, 1) = -1;  // I1 leaves out
  EXPECT_EQ(d.G, G);
  EXPECT_EQ(d.C, C);
  EXPECT_EQ(d.B, B);

  mna::SparseDescriptor s = network.stamp_sparse(b.circuit(), {});
  EXPECT_EQ(Eigen::MatrixXd(s.G), G);
  EXPECT_EQ(Eigen::MatrixXd(s.C), C);
  EXPECT_EQ(Eigen::MatrixXd(s.B), B);
}

TEST(Stamp, NegativeResistorStampsNegativeConductance) {
  CircuitBuilder b;
  b.voltage("V1", "a", "gnd", 1);
  b.resistor("R1", "a", "b", -2);
  b.resistor("R2", "b", "gnd", 4);
  auto network = analysed(b.circuit());
  mna::Descriptor d = network.stamp(b.circuit(), {});
  EXPECT_DOUBLE_EQ(d.G(0, 0), -0.5);
  EXPECT_DOUBLE_EQ(d.G(0, 1), 0.5);
  EXPECT_DOUBLE_EQ(d.G(1, 1), -0.5 + 0.25);
}

// vcvs E1 out-gnd control=(in, gnd) gain=10: row v(out) - 10 v(in) = 0.
TEST(Stamp, ControlledSources) {
  CircuitBuilder b;
  b.voltage("V1", "in", "gnd", 1);
  b.vcvs("E1", "out", "gnd", "in", "gnd", 10);
  b.vccs("G1", "x", "gnd", "in", "out", 2e-3);
  b.ccvs("H1", "y", "gnd", "V1", 50);
  b.cccs("F1", "x", "y", "E1", 0.5);
  b.resistor("R1", "out", "gnd", 1e3);
  b.resistor("R2", "x", "gnd", 1e3);
  b.resistor("R3", "y", "gnd", 1e3);
  auto network = analysed(b.circuit());
  // Nodes: in 0, out 1, x 2, y 3; branches V1 4, E1 5, H1 6.
  ASSERT_EQ(network.unknowns(), 7);
  mna::Descriptor d = network.stamp(b.circuit(), {});
  // E1 row: v(out) - 10 v(in) = 0 and its current leaves out.
  EXPECT_DOUBLE_EQ(d.G(5, 1), 1);
  EXPECT_DOUBLE_EQ(d.G(5, 0), -10);
  EXPECT_DOUBLE_EQ(d.G(1, 5), 1);
  // G1: 2m (v(in) - v(out)) leaves x (row x), enters gnd (no row).
  EXPECT_DOUBLE_EQ(d.G(2, 0), 2e-3);
  EXPECT_DOUBLE_EQ(d.G(2, 1), -2e-3);
  // H1 row: v(y) - 50 i(V1) = 0.
  EXPECT_DOUBLE_EQ(d.G(6, 3), 1);
  EXPECT_DOUBLE_EQ(d.G(6, 4), -50);
  // F1: 0.5 i(E1) leaves x, enters y.
  EXPECT_DOUBLE_EQ(d.G(2, 5), 0.5);
  EXPECT_DOUBLE_EQ(d.G(3, 5), -0.5);
  EXPECT_DOUBLE_EQ(d.G(2, 2), 1e-3);  // R2 only: G1's control is not x
  EXPECT_EQ(d.C, Eigen::MatrixXd::Zero(7, 7));
}

TEST(Stamp, SwitchConductanceFollowsConfiguration) {
  CircuitBuilder b;
  b.voltage("V1", "a", "gnd", 1);
  b.switch_("S1", "a", "b", make_step(1, 0, 1e-6, 0), 0.01, 1e8);
  b.resistor("R1", "b", "gnd", 1);
  auto network = analysed(b.circuit());
  ASSERT_EQ(network.switches(), (std::vector<int>{b.element("S1")}));
  // The gate is 1 before t = 0 (a step from 1): closed initially.
  EXPECT_EQ(network.initial_switches(), (mna::SwitchState{true}));
  mna::Descriptor closed = network.stamp(b.circuit(), {true});
  mna::Descriptor open = network.stamp(b.circuit(), {false});
  EXPECT_DOUBLE_EQ(closed.G(0, 0), 100);
  EXPECT_DOUBLE_EQ(closed.G(0, 1), -100);
  EXPECT_DOUBLE_EQ(open.G(0, 0), 1e-8);
  EXPECT_DOUBLE_EQ(open.G(1, 1), 1 + 1e-8);
  EXPECT_EQ(closed.C, open.C);  // switching changes G only (ARCHITECTURE.md)
  EXPECT_THROW(network.stamp(b.circuit(), {}), std::invalid_argument);  // one entry per switch
  // Restamping after a value change (a sweep) without re-analysing.
  b.circuit().elements[static_cast<std::size_t>(b.element("R1"))].value = 2;
  EXPECT_DOUBLE_EQ(network.stamp(b.circuit(), {true}).G(1, 1), 100 + 0.5);
}

// Coupled inductors: M = k sqrt(La Lb) for every pair (NETLIST.md section 4;
// e.g. Nilsson & Riedel, Electric Circuits, magnetically coupled circuits, from memory).
TEST(Stamp, CoupledInductorsMutualTerms) {
  CircuitBuilder b;
  b.voltage("V1", "p", "gnd", 0);
  b.inductor("L1", "p", "gnd", 1e-3);
  b.inductor("L2", "s", "gnd", 4e-3);
  b.inductor("L3", "t", "gnd", 9e-3);
  b.resistor("R2", "s", "gnd", 10);
  b.resistor("R3", "t", "gnd", 10);
  b.couple("T1", {"L1", "L2", "L3"}, 0.5);
  auto network = analysed(b.circuit());
  mna::Descriptor d = network.stamp(b.circuit(), {});
  const int k1 = network.branch_unknown(b.element("L1"));
  const int k2 = network.branch_unknown(b.element("L2"));
  const int k3 = network.branch_unknown(b.element("L3"));
  EXPECT_DOUBLE_EQ(d.C(k1, k1), 1e-3);
  EXPECT_DOUBLE_EQ(d.C(k1, k2), 0.5 * std::sqrt(1e-3 * 4e-3));  // 1 mH
  EXPECT_DOUBLE_EQ(d.C(k2, k1), 1e-3);
  EXPECT_DOUBLE_EQ(d.C(k1, k3), 0.5 * 3e-3);
  EXPECT_DOUBLE_EQ(d.C(k2, k3), 0.5 * 6e-3);
  EXPECT_DOUBLE_EQ(d.C(k3, k2), 3e-3);

  // A negative k reverses the dotted sense: negative mutual terms.
  b.circuit().couplings[0].k = -0.25;
  EXPECT_DOUBLE_EQ(network.stamp(b.circuit(), {}).C(k1, k2), -0.25 * 2e-3);
}

// Two-winding transformer, k near 1: with the secondary open, the voltage
// ratio v2/v1 = M/L1 = k sqrt(L2/L1) (VERIFICATION.md: sqrt(L2/L1) as k -> 1).
TEST(Stamp, CoupledInductorsOpenCircuitVoltageRatio) {
  CircuitBuilder b;
  b.inductor("L1", "p", "gnd", 1e-3);
  b.inductor("L2", "s", "gnd", 4e-3);
  b.resistor("R1", "p", "gnd", 1);
  b.resistor("R2", "s", "gnd", 1e12);  // nearly open secondary
  b.couple("T1", {"L1", "L2"}, 0.999);
  auto network = analysed(b.circuit());
  mna::Descriptor d = network.stamp(b.circuit(), {});
  // Drive di1/dt = 1 A/s with i2 = 0: the flux rows give v = C_L di/dt.
  const int k1 = network.branch_unknown(b.element("L1"));
  const int k2 = network.branch_unknown(b.element("L2"));
  const double v1 = d.C(k1, k1) * 1.0, v2 = d.C(k2, k1) * 1.0;
  EXPECT_NEAR(v2 / v1, 0.999 * 2.0, 1e-12);
}

TEST(Stamp, NullSpaceOfCFromStructure) {
  CircuitBuilder b;
  b.voltage("V1", "in", "gnd", 5);
  b.resistor("R1", "in", "mid", 2);
  b.inductor("L1", "mid", "out", 3);
  b.capacitor("C1", "out", "gnd", 4);
  b.capacitor("C2", "f1", "f2", 1e-15);  // a capacitor not reaching gnd
  b.resistor("R2", "f1", "gnd", 1);
  b.resistor("R3", "f2", "gnd", 1);
  auto network = analysed(b.circuit());
  mna::Descriptor d = network.stamp(b.circuit(), {});
  const Eigen::MatrixXd& N = network.null_space_of_C();
  // in, mid alone; {f1, f2} together; i(V1): four directions; n = 7.
  ASSERT_EQ(N.rows(), 7);
  ASSERT_EQ(N.cols(), 4);
  EXPECT_LT((d.C * N).norm(), 1e-30);
  EXPECT_LT((N.transpose() * N - Eigen::MatrixXd::Identity(4, 4)).norm(), 1e-15);
  // Rank of C: n - r = 3 (C1, C2 and L1), as an SVD agrees (Eigen 3.4
  // JacobiSVD) once C is scaled symmetrically by its diagonal (Jacobi
  // scaling, common practice): 1 fF next to 4 F needs no absolute tolerance.
  Eigen::VectorXd scale = d.C.diagonal();
  for (Eigen::Index k = 0; k < scale.size(); ++k) scale(k) = scale(k) > 0 ? 1 / std::sqrt(scale(k)) : 1;
  Eigen::JacobiSVD<Eigen::MatrixXd> svd(scale.asDiagonal() * d.C * scale.asDiagonal());
  int rank = 0;
  for (Eigen::Index k = 0; k < svd.singularValues().size(); ++k) {
    if (svd.singularValues()(k) > 1e-12) ++rank;
  }
  EXPECT_EQ(rank, 7 - 4);
}

}  // namespace
}  // namespace ringdown
