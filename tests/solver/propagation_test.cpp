// The propagator paths of the exact engine (propagation.hpp): the truncated sparse
// propagator against the dense one on a 200-state LC ladder, the fixed-size kernels
// against Eigen's dynamic-size product, and the engine's steady loop (transient.cpp)
// against its step-by-step path, plus a ladder run through the truncated path against an
// eigendecomposition of the hand-written ladder equations.
#include <gtest/gtest.h>

#include <Eigen/Dense>
#include <Eigen/Eigenvalues>
#include <cmath>
#include <complex>
#include <random>
#include <string>
#include <unsupported/Eigen/MatrixFunctions>
#include <vector>

#include "circuit_builder.hpp"
#include "parser/waveform.hpp"
#include "solver/propagation.hpp"
#include "solver/transient.hpp"

namespace {

using ringdown::Quantity;
using ringdown::test::CircuitBuilder;
namespace solver = ringdown::solver;

constexpr double kU = 0x1p-53;  // unit roundoff of IEEE double

// The LC ladder of bench/lsim_bench.py: 1 V behind 50 Ohm, `sections` x (1 uH series,
// 400 pF shunt), 50 Ohm load. States i_1..i_n (inductor currents), then v_1..v_n (shunt
// voltages). Kirchhoff's laws, written by hand:
//   L di_1/dt = 1 - 50 i_1 - v_1,  L di_k/dt = v_{k-1} - v_k,
//   C dv_k/dt = i_k - i_{k+1},     C dv_n/dt = i_n - v_n / 50.
struct Ladder {
  Eigen::MatrixXd A, B, C11, Gs, Bs;
};
Ladder ladder(int sections) {
  const int n = sections, r = 2 * n;
  const double L = 1e-6, C = 400e-12, R = 50;
  Ladder l;
  l.Gs = Eigen::MatrixXd::Zero(r, r);
  l.C11 = Eigen::MatrixXd::Zero(r, r);
  l.Bs = Eigen::MatrixXd::Zero(r, 1);
  for (int k = 0; k < n; ++k) {
    l.C11(k, k) = L;
    l.C11(n + k, n + k) = C;
    // Inductor k: L di_k/dt + v_k - v_{k-1} = 0 (v_0 = 1 - R i_1).
    l.Gs(k, n + k) = 1;
    if (k > 0) l.Gs(k, n + k - 1) = -1;
    // Node k: C dv_k/dt - i_k + i_{k+1} = 0.
    l.Gs(n + k, k) = -1;
    if (k + 1 < n) l.Gs(n + k, k + 1) = 1;
  }
  l.Gs(0, 0) = R;
  l.Bs(0, 0) = 1;
  l.Gs(2 * n - 1, 2 * n - 1) = 1 / R;
  const Eigen::VectorXd inv = l.C11.diagonal().cwiseInverse();
  l.A = -(inv.asDiagonal() * l.Gs);
  l.B = inv.asDiagonal() * l.Bs;
  return l;
}

// The augmented system with a constant unit input (S = 0, H = 1: one generator state).
solver::AugmentedSystem augmented(const Ladder& l) {
  const Eigen::MatrixXd S = Eigen::MatrixXd::Zero(1, 1);
  const Eigen::MatrixXd H = Eigen::MatrixXd::Ones(1, 1);
  return solver::make_augmented(l.A, l.B, l.C11, l.Gs, l.Bs, S, H);
}

TEST(Propagation, TruncatedSparseMatchesDenseOnLadder) {
  const Ladder l = ladder(100);
  const auto sys = augmented(l);
  const double h = 2e-9;  // the bench's output step: a tenth of a section's delay
  const Eigen::MatrixXd P = solver::dense_propagator(sys, h);
  const solver::SparsePropagator sp = solver::sparse_propagator(P, sys.scale, sys.scale);
  // The bound of propagation.hpp: each row drops at most u of its balanced norm.
  EXPECT_LE(sp.dropped, kU);
  // The ladder's propagator decays quickly away from the diagonal (a short step couples
  // only neighbouring sections): most of it is dropped.
  EXPECT_LT(sp.P.nonZeros(), P.size() / 4);
  const solver::RunMatrix run = solver::run_matrix(P, sys.scale, sys.scale);
  ASSERT_TRUE(run.is_sparse);
  EXPECT_EQ(run.sparse.nonZeros(), sp.P.nonZeros());
  const Eigen::Index r = l.A.rows(), N = P.rows();
  // The dropped part E = P - P_truncated, row by row in balanced coordinates (recomputed
  // here from P): at most u of each row's norm, the bound of propagation.hpp.
  const Eigen::MatrixXd E = P - Eigen::MatrixXd(sp.P);
  const Eigen::MatrixXd Pb = sys.scale.cwiseInverse().asDiagonal() * P * sys.scale.asDiagonal();
  const Eigen::MatrixXd Eb = sys.scale.cwiseInverse().asDiagonal() * E * sys.scale.asDiagonal();
  for (Eigen::Index i = 0; i < N; ++i)
    EXPECT_LE(Eb.row(i).cwiseAbs().sum(), kU * Pb.row(i).cwiseAbs().sum()) << "row " << i;
  // One step from random states: the truncated product agrees with the dense one to
  // 1e-13 of the result (the dense product of the same propagator as the reference).
  std::mt19937 gen(3);
  std::normal_distribution<double> nd;
  Eigen::VectorXd y, z;
  for (int trial = 0; trial < 20; ++trial) {
    Eigen::VectorXd x(N);
    for (auto& v : x) v = nd(gen);
    x = sys.scale.asDiagonal() * x;  // natural magnitudes (balanced coordinates ~ 1)
    solver::multiply(P, x, y);
    run.apply(x, z);
    const Eigen::VectorXd yb = sys.scale.cwiseInverse().asDiagonal() * y;
    const Eigen::VectorXd db = sys.scale.cwiseInverse().asDiagonal() * (z - y);
    EXPECT_LT(db.cwiseAbs().maxCoeff(), 1e-13 * yb.cwiseAbs().maxCoeff());
  }
  // 10,000 steps from rest: the two trajectories differ by the rounding each product adds
  // (a different order of summation), which accumulates over the steps: measured 1.6e-13
  // of peak, and as much for the untruncated matrix in compressed rows.
  Eigen::VectorXd xd = Eigen::VectorXd::Zero(N), xs = xd;
  xd(r) = xs(r) = 1;
  double err_i = 0, err_v = 0, peak_i = 0, peak_v = 0;
  for (int k = 0; k < 10000; ++k) {
    solver::multiply(P, xd, y);
    xd.swap(y);
    run.apply(xs, y);
    xs.swap(y);
    const Eigen::VectorXd d = (xd - xs).cwiseAbs();
    err_i = std::max(err_i, d.head(r / 2).maxCoeff());
    err_v = std::max(err_v, d.segment(r / 2, r / 2).maxCoeff());
    peak_i = std::max(peak_i, xd.head(r / 2).cwiseAbs().maxCoeff());
    peak_v = std::max(peak_v, xd.segment(r / 2, r / 2).cwiseAbs().maxCoeff());
  }
  EXPECT_LT(err_i, 1e-12 * peak_i);
  EXPECT_LT(err_v, 1e-12 * peak_v);
}

TEST(Propagation, ByActionMatchesDenseExpm) {
  // The propagator from the action on all unit vectors at once against Eigen 3.4's
  // scaling-and-squaring Pade expm (Higham 2005) of the same (balanced) matrix, 200-state
  // ladder, in balanced coordinates (each row relative to its norm).
  const Ladder l = ladder(100);
  const auto sys = augmented(l);
  for (double h : {2e-9, 10e-9}) {
    const Eigen::MatrixXd P = solver::propagator_by_action(sys, h);
    // Eigen's expm of the balanced matrix (its own result on the unbalanced one is off by
    // 1e-11 in these coordinates: the ladder's entries span 1e6 to 2.5e9).
    const Eigen::MatrixXd Rb = (sys.balanced * h).exp();
    const Eigen::VectorXd d = sys.scale, di = d.cwiseInverse();
    const Eigen::MatrixXd Eb = di.asDiagonal() * P * d.asDiagonal() - Rb;
    for (Eigen::Index i = 0; i < P.rows(); ++i)
      EXPECT_LT(Eb.row(i).cwiseAbs().sum(), 1e-13 * Rb.row(i).cwiseAbs().sum()) << "h " << h << " row " << i;
  }
}

TEST(Propagation, SmallMatricesStayDense) {
  // Below kSparseMinSize rows a dense product is as fast: run_matrix keeps it dense.
  const Eigen::MatrixXd P = Eigen::MatrixXd::Identity(6, 6);
  const solver::RunMatrix run = solver::run_matrix(P, Eigen::VectorXd::Ones(6), Eigen::VectorXd::Ones(6));
  EXPECT_FALSE(run.is_sparse);
  EXPECT_EQ(run.dense.rows(), 6);
}

TEST(Propagation, FixedKernelsMatchDynamicProduct) {
  // multiply() with fixed-size kernels (N <= 8) against Eigen 3.4's dynamic-size product:
  // equal to within the rounding bound n u |P||x| of a dot product (Higham 2002, sec. 3.1).
  std::mt19937 gen(5);
  std::normal_distribution<double> nd;
  for (int n = 1; n <= 10; ++n) {
    Eigen::MatrixXd P(n, n);
    Eigen::VectorXd x(n), y(n);
    for (auto& v : P.reshaped()) v = nd(gen);
    for (auto& v : x) v = nd(gen);
    solver::multiply(P, x, y);
    const Eigen::VectorXd ref = P * x;
    const Eigen::VectorXd bound = 2.0 * n * kU * (P.cwiseAbs() * x.cwiseAbs());
    for (int i = 0; i < n; ++i) EXPECT_LE(std::abs(y(i) - ref(i)), bound(i)) << "n " << n;
    solver::RunMatrix run;
    run.dense = P;
    Eigen::VectorXd z;
    run.apply(x, z);
    EXPECT_EQ(z, y) << "n " << n;  // the same kernel
  }
}

// A switch node with an RC snubber (bench/lsim_bench.py's 4-state case), pulse corners
// both on and between samples.
CircuitBuilder snubber() {
  CircuitBuilder b;
  ringdown::PulseSpec p;
  p.low = 0;
  p.high = 48;
  p.period = 10e-6;
  p.width = 4.98e-6;
  p.rise = 10e-9;
  p.fall = 10.5e-9;
  p.start = 1e-6;
  b.voltage("Vsw", "sw", "gnd", ringdown::make_pulse(p));
  b.inductor("Lk", "sw", "a", 100e-9);
  b.resistor("Rk", "a", "drain", 0.02);
  b.capacitor("Coss", "drain", "gnd", 470e-12);
  b.resistor("Rsn", "drain", "mid", 15);
  b.capacitor("Csn", "mid", "gnd", 1.5e-9);
  b.inductor("Lout", "drain", "b", 10e-6);
  b.resistor("Rl", "b", "out", 0.05);
  b.resistor("Rload", "out", "gnd", 10);
  return b;
}

TEST(Transient, SteadyLoopMatchesStepByStep) {
  // The steady loop (fixed-size kernels, no dense output) against the step-by-step path
  // the engine takes with dense output on: the same samples at the same instants, values
  // equal to rounding (common practice, no source: two orderings of the same products).
  CircuitBuilder b = snubber();
  const std::vector<ringdown::Signal> sig = {b.v("drain"), b.v("out"), b.q(1, Quantity::Current)};
  solver::TransientOptions opt;
  opt.until = 40e-6;
  opt.every = 2e-9;
  ringdown::Diagnostics d1, d2;
  const auto fast = solver::run_transient_sampled(b.c, sig, opt, d1);
  opt.dense_output = true;
  const auto slow = solver::run_transient_sampled(b.c, sig, opt, d2);
  ASSERT_EQ(fast.summary.status, solver::Status::Ok);
  ASSERT_EQ(slow.summary.status, solver::Status::Ok);
  ASSERT_EQ(fast.time.size(), 20001u);
  ASSERT_EQ(fast.time, slow.time);
  for (std::size_t s = 0; s < sig.size(); ++s) {
    double peak = 0, err = 0;
    for (std::size_t k = 0; k < fast.time.size(); ++k) {
      peak = std::max(peak, std::abs(slow.values[s][k]));
      err = std::max(err, std::abs(fast.values[s][k] - slow.values[s][k]));
    }
    EXPECT_LT(err, 1e-13 * peak) << sig[s].name;
  }
}

TEST(Transient, LadderThroughTruncatedPropagatorMatchesEigendecomposition) {
  // The bench's 200-state ladder, 1e4 samples of 2 ns from rest: the engine takes the
  // truncated sparse propagator. Reference: the hand-written ladder equations above solved
  // by Eigen 3.4's eigendecomposition, x(t) = V e^{Lambda t} V^-1 (x0 - xf) + xf with the
  // final state xf = -A^-1 B (linear ODE theory; the ladder's modes are distinct).
  const int n = 100;
  CircuitBuilder b;
  b.voltage("V1", "in", "gnd", ringdown::make_constant(1));
  b.resistor("Rs", "in", "n0", 50);
  for (int k = 1; k <= n; ++k) {
    b.inductor("L" + std::to_string(k), "n" + std::to_string(k - 1), "n" + std::to_string(k), 1e-6);
    b.capacitor("C" + std::to_string(k), "n" + std::to_string(k), "gnd", 400e-12);
  }
  b.resistor("Rload", "n" + std::to_string(n), "gnd", 50);
  const auto r = ringdown::test::run(b, {b.v("n50"), b.v("n100")}, 20e-6, 2e-9, false);
  ASSERT_EQ(r.time.size(), 10001u);
  EXPECT_GE(r.summary.sparse_propagators, 1u);

  const Ladder l = ladder(n);
  Eigen::EigenSolver<Eigen::MatrixXd> es(l.A);
  ASSERT_EQ(es.info(), Eigen::Success);
  const Eigen::VectorXcd lam = es.eigenvalues();
  const Eigen::MatrixXcd V = es.eigenvectors();
  const Eigen::VectorXd xf = -l.A.partialPivLu().solve(l.B.col(0));
  const Eigen::VectorXcd c = V.partialPivLu().solve((-xf).cast<std::complex<double>>());
  double err = 0, peak = 0;
  for (std::size_t k = 0; k < r.time.size(); k += 7) {
    const double t = r.time[k];
    const Eigen::VectorXcd e = (lam * t).array().exp() * c.array();
    for (int s = 0; s < 2; ++s) {
      const int row = n + (s == 0 ? 49 : 99);  // v_50, v_100
      const double ref = (V.row(row) * e)(0).real() + xf(row);
      err = std::max(err, std::abs(r.values[static_cast<std::size_t>(s)][k] - ref));
      peak = std::max(peak, std::abs(ref));
    }
  }
  // 1e-10 of peak: within the engine's 1e-9 target, and the eigendecomposition's own
  // accuracy on this network (bench/README.md: 3e-12 on the 1000-state ladder).
  EXPECT_LT(err, 1e-10 * peak);
}

}  // namespace
