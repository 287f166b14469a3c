// Propagator of a stiff linear descriptor system, accurate block by block.
//
// For E X' + F X = 0 (E invertible) returns Phi = expm(-E^-1 F h), computed so that the
// slow states keep their own relative accuracy when the rates of the system span up to
// 1e15 (STIFF.md). A plain scaling-and-squaring expm of the whole matrix loses about
// machine epsilon times the span in the slowest mode's decay rate; this one separates the
// states into rate blocks by elimination on the descriptor pair (E, F), finds each fast
// block's slow manifold by Newton iteration, and takes one expm per block.
//
// In ringdown, E is the reduced capacitance/inductance matrix augmented with identity rows
// for the input-generator states (w' = S w) and F the reduced conductance matrix with the
// coupling to those states, so Phi carries the input terms too.
//
// What it does not do: sparse or large-n work (it is dense, O(n^3) per level), caching per
// h (the caller caches), or the action of the exponential on a vector.
#pragma once

#include <Eigen/Dense>
#include <string>
#include <vector>

namespace ringdown::solver {

// What stiff_propagator did, for logs and tests.
struct ExponentialReport {
  bool block_method = false;   // true when at least one rate cut was accepted
  int levels = 0;              // depth of the tree of accepted cuts (0: one expm)
  double newton_residual = 0;  // worst relative residual of the slow-manifold equations
  std::string note;            // one line per decision (cuts, rejections, fallbacks)
};

// Phi = expm(-E^-1 F h). Rate span (see stiffness_rates) below 1e4: one equilibrated
// double-precision expm (plain_propagator; at 1e6 it would lose 3e-10 of peak). Otherwise
// the multilevel block elimination of STIFF.md, with an 80-bit long double expm per block.
// Measured: within 2x of stepping with the exact Phi rounded to float64 (about 1e-13 of
// peak) on the STIFF.md networks up to a span of 1e15 (docs/stiff.md).
// Cost: 10-25x one plain expm for n <= 21 (0.1-2 ms); dense O(n^3) per level.
// Throws std::invalid_argument for mismatched sizes or non-finite input,
// std::domain_error when E is singular.
Eigen::MatrixXd stiff_propagator(const Eigen::MatrixXd& E, const Eigen::MatrixXd& F, double h,
                                 ExponentialReport* report = nullptr);

// The cheap path and the comparison baseline: A = -E^-1 F, diagonally balanced (powers of
// two, exact), Eigen's scaling-and-squaring Pade expm (Higham 2005), unbalanced back.
Eigen::MatrixXd plain_propagator(const Eigen::MatrixXd& E, const Eigen::MatrixXd& F, double h);

// The states ordered fast to slow by greedy elimination on successive Schur complements of
// (E, F), with the rate r_i = max(|F_ii|/e_i, max_j sqrt(|F_ij F_ji| / (e_i e_j))) of each
// when it was eliminated (STIFF.md step 2). Oscillatory pairs (coupling term dominant) are
// eliminated together; `pair_with_next[k]` marks a position that may not be cut after.
struct RateOrder {
  std::vector<int> order;           // original state index at each position, fast first
  std::vector<double> rate;         // rate at each position, 1/s
  std::vector<bool> pair_with_next;
};
RateOrder stiffness_rates(const Eigen::MatrixXd& E, const Eigen::MatrixXd& F);

// max rate / min positive rate of stiffness_rates (1 when fewer than two positive rates).
double rate_span(const RateOrder& rates);

}  // namespace ringdown::solver
