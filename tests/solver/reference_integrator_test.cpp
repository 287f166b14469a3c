// Reference integrator (trapezoidal rule, BDF2) against closed forms:
// first-order RC step and switched RC responses (e.g. Hayt, Kemmerly & Durbin,
// Engineering Circuit Analysis, first-order circuits; from memory), second-
// order convergence (both methods are second order: standard numerical
// analysis texts, from memory), and the trapezoidal rule's exact rotation on a
// lossless LC tank.
#include <gtest/gtest.h>

#include <cmath>

#include "mna/descriptor.hpp"
#include "solver/reference_integrator.hpp"
#include "tests/mna/builder.hpp"

namespace ringdown {
namespace {

using solver::ReferenceMethod;
using mna_testing::CircuitBuilder;

mna::Network analysed(Circuit& circuit) {
  Diagnostics diagnostics;
  auto network = mna::Network::analyse(circuit, false, diagnostics);
  EXPECT_TRUE(network.has_value());
  for (const auto& d : diagnostics) ADD_FAILURE() << "unexpected: " << d.message;
  return *network;
}

constexpr double kR = 1e3, kC = 1e-6, kTau = kR * kC, kV = 1.0;

// Largest error of v(out) over the samples against `exact`.
template <class Exact>
double max_error(const solver::ReferenceSolution& s, int unknown, Exact exact) {
  double worst = 0;
  for (std::size_t k = 0; k < s.times.size(); ++k) {
    worst = std::max(worst, std::abs(s.states(unknown, static_cast<Eigen::Index>(k)) - exact(s.times[k])));
  }
  return worst;
}

class ReferenceRcStep : public ::testing::TestWithParam<ReferenceMethod> {};

// V1 steps 0 -> 1 V at t = 0 into R1 = 1 kOhm, C1 = 1 uF: v(out) = V (1 - exp(-t/RC)).
TEST_P(ReferenceRcStep, SecondOrderConvergence) {
  CircuitBuilder b;
  b.voltage("V1", "in", "gnd", make_step(0, kV, 0, 0));
  b.resistor("R1", "in", "out", kR);
  b.capacitor("C1", "out", "gnd", kC);
  Circuit& c = b.circuit();
  mna::Network network = analysed(c);
  const int out = network.node_unknown(c.find_node("out"));
  const int in = network.node_unknown(c.find_node("in"));
  const int iv = network.branch_unknown(b.element("V1"));
  auto exact = [](double t) { return kV * (1 - std::exp(-t / kTau)); };
  const Eigen::VectorXd x0 = Eigen::VectorXd::Zero(network.unknowns());  // DC before the step

  std::vector<double> errors;
  for (int substeps : {1, 2, 4, 8}) {
    auto s = solver::integrate_reference(c, network, 5 * kTau, kTau / 10, GetParam(), x0, substeps);
    ASSERT_TRUE(s.ok());
    ASSERT_EQ(s.times.size(), 51u);
    EXPECT_DOUBLE_EQ(s.times.back(), 5 * kTau);
    errors.push_back(max_error(s, out, exact));
    // Consistent algebraic unknowns at every sample, t = 0+ included:
    // v(in) = V and i(V1) = -(V - v(out))/R (Ohm's law), no +- ringing.
    for (Eigen::Index k = 0; k < s.states.cols(); ++k) {
      EXPECT_NEAR(s.states(in, k), kV, 1e-12);
      EXPECT_NEAR(s.states(iv, k), -(kV - s.states(out, k)) / kR, 1e-14);
    }
  }
  for (std::size_t k = 1; k < errors.size(); ++k) {
    const double ratio = errors[k - 1] / errors[k];
    EXPECT_GT(ratio, 3.5) << "h / 2^" << k;  // second order: halving h divides the error by ~4
    EXPECT_LT(ratio, 4.5) << "h / 2^" << k;
  }
  EXPECT_LT(errors.back(), 3e-5);  // h = tau / 80
  if (GetParam() == ReferenceMethod::Trapezoidal) {
    // Leading global error of the trapezoidal rule on y' = -y/tau:
    // e(t) = (h/tau)^2 / 12 * (t/tau) exp(-t/tau), largest at t = tau (local
    // error constant 1/12; standard numerical analysis, from memory).
    for (std::size_t k = 0; k < errors.size(); ++k) {
      const double h = kTau / 10 / std::pow(2.0, static_cast<double>(k));
      const double predicted = (h / kTau) * (h / kTau) / 12 * std::exp(-1.0);
      EXPECT_NEAR(errors[k], predicted, 0.05 * predicted) << "h / 2^" << k;
    }
  }
}

// The gate opens S1 at ts = 1.05 ms, between output samples. Closed form:
// charging with Vth = V R2/(Rc + R2), tau1 = (Rc || R2) C until ts, then
// towards Vo = V R2/(Ro + R2) with tau2 = (Ro || R2) C.
TEST_P(ReferenceRcStep, SwitchOpeningBetweenSamples) {
  constexpr double kRc = 1e3, kRo = 1e9, kR2 = 1e3, kTs = 1.05e-3;
  CircuitBuilder b;
  b.voltage("V1", "in", "gnd", kV);
  b.switch_("S1", "in", "out", make_step(1, 0, kTs, 0), kRc, kRo);
  b.resistor("R2", "out", "gnd", kR2);
  b.capacitor("C1", "out", "gnd", kC);
  Circuit& c = b.circuit();
  mna::Network network = analysed(c);
  const int out = network.node_unknown(c.find_node("out"));
  const double vth = kV * kR2 / (kRc + kR2), tau1 = kRc * kR2 / (kRc + kR2) * kC;
  const double vo = kV * kR2 / (kRo + kR2), tau2 = kRo * kR2 / (kRo + kR2) * kC;
  auto exact = [&](double t) {
    if (t < kTs) return vth * (1 - std::exp(-t / tau1));
    const double vs = vth * (1 - std::exp(-kTs / tau1));
    return vo + (vs - vo) * std::exp(-(t - kTs) / tau2);
  };
  // Zero initial state (capacitor empty; the source row is made consistent at 0+).
  const Eigen::VectorXd x0 = Eigen::VectorXd::Zero(network.unknowns());
  std::vector<double> errors;
  for (int substeps : {1, 2, 4, 8}) {
    auto s = solver::integrate_reference(c, network, 4e-3, 1e-4, GetParam(), x0, substeps);
    ASSERT_TRUE(s.ok());
    EXPECT_GE(s.restarts, 2);  // t = 0 and the opening
    errors.push_back(max_error(s, out, exact));
  }
  for (std::size_t k = 1; k < errors.size(); ++k) {
    const double ratio = errors[k - 1] / errors[k];
    EXPECT_GT(ratio, 3.3) << "h / 2^" << k;
    EXPECT_LT(ratio, 4.7) << "h / 2^" << k;
  }
  EXPECT_LT(errors.back(), 1e-4);
}

// A step on an output instant (t = 1 ms = 10 * every): the sample there is
// the right limit (v(in) = V already, v(out) still 0), and the response after
// it is the delayed RC step (time invariance).
TEST_P(ReferenceRcStep, StepOnAnOutputInstant) {
  constexpr double kAt = 1e-3;
  CircuitBuilder b;
  b.voltage("V1", "in", "gnd", make_step(0, kV, kAt, 0));
  b.resistor("R1", "in", "out", kR);
  b.capacitor("C1", "out", "gnd", kC);
  Circuit& c = b.circuit();
  mna::Network network = analysed(c);
  const int out = network.node_unknown(c.find_node("out"));
  const int in = network.node_unknown(c.find_node("in"));
  auto exact = [](double t) { return t < kAt ? 0.0 : kV * (1 - std::exp(-(t - kAt) / kTau)); };
  const Eigen::VectorXd x0 = Eigen::VectorXd::Zero(network.unknowns());
  std::vector<double> errors;
  for (int substeps : {1, 2, 4}) {
    auto s = solver::integrate_reference(c, network, 4e-3, 1e-4, GetParam(), x0, substeps);
    ASSERT_TRUE(s.ok());
    EXPECT_EQ(s.restarts, 2);
    EXPECT_NEAR(s.times[10], kAt, 1e-18);
    EXPECT_NEAR(s.states(in, 9), 0, 1e-15);
    EXPECT_NEAR(s.states(in, 10), kV, 1e-12);
    EXPECT_NEAR(s.states(out, 10), 0, 1e-15);
    errors.push_back(max_error(s, out, exact));
  }
  EXPECT_NEAR(errors[0] / errors[1], 4, 0.5);  // second order
  EXPECT_NEAR(errors[1] / errors[2], 4, 0.5);
}

// Two inductors in series, node m between them touching nothing else (a cut
// of inductors alone, formally index 2): as one inductance L1 + L2 (series
// inductances add), i = V/R (1 - exp(-t R/(L1 + L2))) and v(m) = L2 di/dt,
// v(m)(0+) = V L2/(L1 + L2) (inductive divider), both second order.
TEST_P(ReferenceRcStep, SeriesInductorsHiddenConstraint) {
  constexpr double kL1 = 1e-3, kL2 = 3e-3, kRs = 1, kT = (kL1 + kL2) / kRs;
  CircuitBuilder b;
  b.voltage("V1", "in", "gnd", make_step(0, kV, 0, 0));
  b.resistor("R1", "in", "a", kRs);
  b.inductor("L1", "a", "m", kL1);
  b.inductor("L2", "m", "gnd", kL2);
  Circuit& c = b.circuit();
  mna::Network network = analysed(c);
  ASSERT_EQ(network.inductor_cuts().size(), 1u);
  const int i1 = network.branch_unknown(b.element("L1"));
  const int vm = network.node_unknown(c.find_node("m"));
  const Eigen::VectorXd x0 = Eigen::VectorXd::Zero(network.unknowns());
  std::vector<double> current_errors, voltage_errors;
  for (int substeps : {1, 2, 4}) {
    auto s = solver::integrate_reference(c, network, 10e-3, 1e-4, GetParam(), x0, substeps);
    ASSERT_TRUE(s.ok());
    EXPECT_NEAR(s.states(vm, 0), kV * kL2 / (kL1 + kL2), 1e-5);
    current_errors.push_back(max_error(s, i1, [&](double t) { return kV / kRs * (1 - std::exp(-t / kT)); }));
    voltage_errors.push_back(max_error(s, vm, [&](double t) { return kV * kL2 / (kL1 + kL2) * std::exp(-t / kT); }));
  }
  for (std::size_t k = 1; k < current_errors.size(); ++k) {
    EXPECT_NEAR(current_errors[k - 1] / current_errors[k], 4, 0.5);
    EXPECT_NEAR(voltage_errors[k - 1] / voltage_errors[k], 4, 0.5);
  }
}

INSTANTIATE_TEST_SUITE_P(Methods, ReferenceRcStep,
                         ::testing::Values(ReferenceMethod::Trapezoidal, ReferenceMethod::Bdf2),
                         [](const auto& info) { return std::string(solver::method_name(info.param)); });

// Lossless LC tank, v(0) = 1 V, i(0) = 0. The trapezoidal rule maps
// x' = A x with eigenvalues +-j w to (1 + A h/2)/(1 - A h/2): a rotation by
// theta = 2 atan(w h / 2) per step with no change of energy (standard
// numerical analysis; from memory), so v_k = cos(k theta) exactly. BDF2 damps.
TEST(ReferenceIntegrator, TrapezoidalRotatesAnLcTankExactly) {
  constexpr double kL = 1e-3, kCap = 1e-6;
  CircuitBuilder b;
  b.inductor("L1", "a", "gnd", kL);
  b.capacitor("C1", "a", "gnd", kCap);
  Circuit& c = b.circuit();
  mna::Network network = analysed(c);
  const int v = network.node_unknown(c.find_node("a"));
  const int i = network.branch_unknown(b.element("L1"));
  Eigen::VectorXd x0 = Eigen::VectorXd::Zero(network.unknowns());
  x0(v) = 1;
  const double w = 1 / std::sqrt(kL * kCap), h = 1e-5;
  auto energy = [&](const Eigen::MatrixXd& x, Eigen::Index k) {
    return 0.5 * kCap * x(v, k) * x(v, k) + 0.5 * kL * x(i, k) * x(i, k);
  };
  auto tr = solver::integrate_reference(c, network, 1000 * h, h, ReferenceMethod::Trapezoidal, x0);
  ASSERT_TRUE(tr.ok());
  const double theta = 2 * std::atan(w * h / 2);
  for (Eigen::Index k = 0; k < tr.states.cols(); ++k) {
    EXPECT_NEAR(tr.states(v, k), std::cos(static_cast<double>(k) * theta), 1e-10);
    EXPECT_NEAR(energy(tr.states, k), energy(tr.states, 0), 1e-12 * energy(tr.states, 0));
  }
  auto bdf = solver::integrate_reference(c, network, 1000 * h, h, ReferenceMethod::Bdf2, x0);
  ASSERT_TRUE(bdf.ok());
  EXPECT_LT(energy(bdf.states, bdf.states.cols() - 1), 0.99 * energy(bdf.states, 0));
}

TEST(ReferenceIntegrator, BadArgumentsAreErrors) {
  CircuitBuilder b;
  b.voltage("V1", "a", "gnd", 1);
  b.resistor("R1", "a", "gnd", 1);
  Circuit& c = b.circuit();
  mna::Network network = analysed(c);
  const Eigen::VectorXd x0 = Eigen::VectorXd::Zero(network.unknowns());
  EXPECT_FALSE(solver::integrate_reference(c, network, 0, 1, ReferenceMethod::Bdf2, x0).ok());
  EXPECT_FALSE(solver::integrate_reference(c, network, 1, 0.1, ReferenceMethod::Bdf2, x0, 0).ok());
  EXPECT_FALSE(
      solver::integrate_reference(c, network, 1, 0.1, ReferenceMethod::Bdf2, Eigen::VectorXd(1)).ok());
}

}  // namespace
}  // namespace ringdown
