// Index-1 reduction on hand-written descriptors and on mna's stamps:
// the reduced system must satisfy the descriptor equations, keep the
// pencil's finite eigenvalues, and survive 1 fF next to 1 H.
#include <gtest/gtest.h>

#include <Eigen/Eigenvalues>
#include <algorithm>
#include <complex>
#include <random>
#include <unsupported/Eigen/MatrixFunctions>

#include "circuit_builder.hpp"
#include "mna/descriptor.hpp"
#include "solver/propagation.hpp"
#include "solver/source_model.hpp"
#include "solver/state_space.hpp"

namespace {

using namespace ringdown;
using solver::DifferentialStructure;

// Residual of C x' + G x - B u for x = T xs + D u, x' = T (A xs + B u)
// (constant u): zero when the reduction is right (definition of the
// reduction, ARCHITECTURE.md step 1).
// `equal_states`: draw all states equal (the constraint manifold of an
// inductor-only cut of two inductors).
double descriptor_residual(const mna::Descriptor& d, const solver::StateSpace& s,
                           bool equal_states = false) {
  std::mt19937 gen(7);
  std::normal_distribution<double> nd;
  double worst = 0;
  for (int trial = 0; trial < 5; ++trial) {
    Eigen::VectorXd xs(s.A.rows()), u(d.B.cols());
    for (auto& v : xs) v = nd(gen);
    if (equal_states) xs.setConstant(xs(0));
    for (auto& v : u) v = nd(gen);
    const Eigen::VectorXd x = s.T * xs + s.D * u;
    const Eigen::VectorXd dx = s.T * (s.A * xs + s.B * u);
    const Eigen::VectorXd res = d.C * dx + d.G * x - d.B * u;
    const double scale = (d.C.cwiseAbs() * dx.cwiseAbs() + d.G.cwiseAbs() * x.cwiseAbs() +
                          d.B.cwiseAbs() * u.cwiseAbs())
                             .maxCoeff();
    worst = std::max(worst, res.cwiseAbs().maxCoeff() / scale);
  }
  return worst;
}

std::vector<std::complex<double>> sorted(Eigen::VectorXcd v) {
  std::vector<std::complex<double>> out(v.data(), v.data() + v.size());
  std::sort(out.begin(), out.end(), [](auto a, auto b) {
    return a.real() != b.real() ? a.real() < b.real() : a.imag() < b.imag();
  });
  return out;
}

TEST(Reduction, HandWrittenFloatingCapacitor) {
  // Unknowns: v1, v2, v3, iL. Capacitor 1-2 (floating: no capacitor to gnd),
  // R 1-gnd, R 2-3, R 3-gnd, inductor 3-gnd, current source into node 1.
  const double c = 2e-6, g1 = 1e-3, g2 = 5e-3, g3 = 2e-3, L = 1e-3;
  mna::Descriptor d;
  d.C = Eigen::MatrixXd::Zero(4, 4);
  d.C(0, 0) = c; d.C(1, 1) = c; d.C(0, 1) = -c; d.C(1, 0) = -c;
  d.C(3, 3) = L;
  d.G = Eigen::MatrixXd::Zero(4, 4);
  d.G(0, 0) = g1;
  d.G(1, 1) = g2; d.G(1, 2) = -g2; d.G(2, 1) = -g2; d.G(2, 2) = g2 + g3;
  d.G(2, 3) = 1; d.G(3, 2) = -1;  // inductor row: L i' - v3 = 0
  d.B = Eigen::MatrixXd::Zero(4, 1);
  d.B(0, 0) = 1;
  DifferentialStructure st;
  st.capacitor_branches = {{0, 1}};
  st.inductor_unknowns = {3};
  const auto part = solver::partition_states(st, 4, d.C);
  EXPECT_EQ(part.state_unknown.size(), 2u);  // one capacitor voltage + iL
  const auto red = solver::reduce(d, part);
  ASSERT_TRUE(red.ok) << red.message;
  EXPECT_LT(descriptor_residual(d, red.system), 1e-14);
  // Finite generalized eigenvalues of the pencil (-G, C) by Eigen 3.4's
  // GeneralizedEigenSolver (QZ) equal the eigenvalues of A.
  Eigen::GeneralizedEigenSolver<Eigen::MatrixXd> ges(-d.G, d.C);
  std::vector<std::complex<double>> finite;
  for (Eigen::Index i = 0; i < 4; ++i)
    if (std::abs(ges.betas()(i)) > 1e-12 * std::abs(ges.alphas()(i)))
      finite.push_back(ges.alphas()(i) / ges.betas()(i));
  std::sort(finite.begin(), finite.end(), [](auto a, auto b) { return a.real() < b.real(); });
  const auto eig = sorted(red.system.A.eigenvalues());
  ASSERT_EQ(eig.size(), finite.size());
  for (std::size_t i = 0; i < eig.size(); ++i)
    EXPECT_LT(std::abs(eig[i] - finite[i]), 1e-10 * std::abs(finite[i]));
}

TEST(Reduction, FemtofaradAndHenryFromTheStamps) {
  // Series R-L-C, C = 1 fF, L = 1 H: A's eigenvalues are the roots of
  // s^2 + (R/L) s + 1/(LC) (Nilsson & Riedel, second-order circuits; from memory).
  const double R = 1e6, L = 1, C = 1e-15;
  test::CircuitBuilder b;
  b.voltage("V1", "in", "gnd", make_constant(1));
  b.resistor("R1", "in", "a", R);
  b.inductor("L1", "a", "b", L);
  b.capacitor("C1", "b", "gnd", C);
  Diagnostics diags;
  auto net = mna::Network::analyse(b.c, false, diags);
  ASSERT_TRUE(net);
  const auto d = net->stamp(b.c, net->initial_switches());
  DifferentialStructure st;
  st.capacitor_branches = {{net->node_unknown(b.c.find_node("b")), -1}};
  st.inductor_unknowns = {net->branch_unknown(b.c.parts[2].main)};
  const auto part = solver::partition_states(st, net->unknowns(), d.C);
  const auto red = solver::reduce(d, part);
  ASSERT_TRUE(red.ok) << red.message;
  ASSERT_EQ(red.system.A.rows(), 2);
  EXPECT_LT(descriptor_residual(d, red.system), 1e-13);
  const std::complex<double> disc = std::sqrt(std::complex<double>(R * R / (L * L) - 4 / (L * C)));
  const std::complex<double> s1 = (-R / L + disc) / 2.0, s2 = (-R / L - disc) / 2.0;
  const auto eig = sorted(red.system.A.eigenvalues());
  const auto ref = sorted((Eigen::VectorXcd(2) << s1, s2).finished());
  for (int i = 0; i < 2; ++i) EXPECT_LT(std::abs(eig[i] - ref[i]), 1e-12 * std::abs(ref[i]));
}

TEST(Reduction, InductorOnlyCut) {
  // Two inductors in series with nothing else at the joint: KCL ties the
  // two states (formally index 2).
  test::CircuitBuilder b;
  b.voltage("V1", "in", "gnd", make_constant(1));
  b.resistor("R1", "in", "a", 1);
  b.inductor("L1", "a", "mid", 1e-3);
  b.inductor("L2", "mid", "gnd", 2e-3);
  Diagnostics diags;
  auto net = mna::Network::analyse(b.c, false, diags);
  ASSERT_TRUE(net);
  const auto d = net->stamp(b.c, net->initial_switches());
  DifferentialStructure st;
  st.inductor_unknowns = {net->branch_unknown(b.c.parts[2].main),
                          net->branch_unknown(b.c.parts[3].main)};
  const auto part = solver::partition_states(st, net->unknowns(), d.C);
  const auto red = solver::reduce(d, part);
  // Index reduction by differentiating the KCL constraint i1 = i2 (Brenan,
  // Campbell & Petzold 1989; from memory): on the constraint manifold the
  // reduced system satisfies the descriptor equations, and the series pair
  // has the single natural mode -R/(L1 + L2) plus the conserved i1 - i2.
  ASSERT_TRUE(red.ok) << red.message;
  EXPECT_LT(descriptor_residual(d, red.system, true), 1e-12);
  auto eig = sorted(red.system.A.eigenvalues());
  EXPECT_NEAR(eig[0].real(), -1.0 / 3e-3, 1e-9 / 3e-3);
  EXPECT_NEAR(std::abs(eig[1]), 0.0, 1e-9 / 3e-3);
}

TEST(SourceModel, PiecesReproduceTheirTerms) {
  // u(tau) = H expm(S tau) w0 + constant must equal the sum of the terms
  // (the definition of ExpPolyTerm, waveform.hpp); expm by Eigen 3.4.
  std::vector<ExpPolyTerm> terms = {
      {1.5, 0, 0, 0, 0},        {-2, 1, 0, 0, 0},          {0.7, 3, 0, 0, 0},
      {2, 0, -3e5, 0, 0},       {1, 2, -1e5, 0, 0},        {0.8, 0, -2e4, 6e5, 0.3},
      {0.4, 1, -2e4, 6e5, -1},  {0.25, 0, 0, -4e5, 0.9},   {3, 0, 0, 0, 0.5}};
  const double T0 = 1e-6;
  const auto p = solver::source_piece(terms, T0);
  const auto sys = solver::assemble_inputs({p});
  Eigen::VectorXd w0(sys.S.rows());
  w0(0) = 1;
  w0.tail(p.w0.size()) = p.w0;
  for (double tau : {0.0, 0.3e-6, 1e-6, 4.7e-6, 2e-5}) {
    const Eigen::VectorXd w = (sys.S * tau).exp() * w0;
    double exact = 0, size = 0;
    for (const auto& t : terms) {
      const double v = t.coef * std::pow(tau, t.power) * std::exp(t.rate * tau) *
                       std::cos(t.omega * tau + t.phase);
      exact += v;
      size += std::abs(v);
    }
    EXPECT_NEAR((sys.H * w)(0), exact, 1e-12 * std::max(size, 1.0)) << "tau = " << tau;
  }
}

TEST(Propagation, ActionMatchesDenseExponential) {
  // Al-Mohy & Higham's action against Eigen 3.4's dense expm (Higham 2005)
  // on random matrices of growing norm.
  std::mt19937 gen(11);
  std::normal_distribution<double> nd;
  for (int n : {3, 12, 40}) {
    Eigen::MatrixXd A(n, n);
    for (auto& v : A.reshaped()) v = nd(gen);
    A -= 2.0 * Eigen::MatrixXd::Identity(n, n);
    Eigen::VectorXd v(n);
    for (auto& x : v) x = nd(gen);
    const Eigen::MatrixXd Bm = Eigen::MatrixXd::Zero(n, 1);
    const Eigen::MatrixXd S = Eigen::MatrixXd::Zero(1, 1);
    const Eigen::MatrixXd H = Eigen::MatrixXd::Zero(1, 1);
    const auto sys = solver::make_augmented(A, Bm, Eigen::MatrixXd::Identity(n, n), -A, Bm, S, H);
    Eigen::VectorXd X(n + 1), Y, w1, w2;
    X << v, 1.0;
    for (double h : {0.01, 0.5, 3.0}) {
      solver::expm_action(sys, h, X, Y, w1, w2);
      const Eigen::VectorXd ref = (sys.M * h).exp() * X;
      EXPECT_LT((Y - ref).norm(), 1e-12 * ref.norm() + 1e-300) << "n " << n << " h " << h;
      Eigen::VectorXd Z(n + 1);
      const Eigen::MatrixXd P = solver::dense_propagator(sys, h);
      solver::multiply(P, X, Z);
      EXPECT_LT((Z - ref).norm(), 1e-12 * ref.norm() + 1e-300);
    }
  }
}

TEST(Propagation, BalancingIsASimilarity) {
  Eigen::MatrixXd M(3, 3);
  M << 1, 1e8, 0, 1e-8, 2, 1e4, 3, 1e-4, -1;
  Eigen::MatrixXd B = M;
  Eigen::VectorXd d;
  solver::balance(B, d);
  // D^-1 M D reproduced exactly (powers of two; Parlett & Reinsch 1969).
  const Eigen::MatrixXd ref = d.cwiseInverse().asDiagonal() * M * d.asDiagonal();
  EXPECT_LT((B - ref).cwiseAbs().maxCoeff(), 1e-15 * ref.cwiseAbs().maxCoeff());
  EXPECT_LT(B.cwiseAbs().maxCoeff(), M.cwiseAbs().maxCoeff());
}

}  // namespace
