// Exact propagation of the augmented system X = [x_s; w],
//     X' = M X,   M = [[A, B H], [0, S]],   X(t + h) = expm(M h) X(t),
// which is the variation-of-parameters (Duhamel) formula in closed form for
// exponential-polynomial inputs (ARCHITECTURE.md, "Exact propagation").
//
// Three ways to apply expm(M h):
//  - a dense propagator, built once and cached per (configuration, input
//    structure, step length): one matrix-vector product per step;
//  - the action expm(M h) v by the truncated Taylor method of Al-Mohy and
//    Higham ("Computing the action of the matrix exponential, with an
//    application to exponential integrators", SIAM J. Sci. Comput. 33(2),
//    2011), for step lengths met once (partial steps to corners between
//    output samples): a few matrix-vector products, no dense expm; and, on
//    large sparse systems (long ladders), for every step when its products
//    over the run cost less than one dense expm (compressed-row products,
//    O(nnz) each; the engine compares action_flops and
//    dense_propagator_flops);
//  - fixed-size Eigen kernels for the matrix-vector product when the
//    augmented size is <= 8.
// The dense propagator comes from one function, dense_propagator(): the
// stiff-accurate block method of STIFF.md when solver/stiff_exponential.hpp
// is present, else Eigen's scaling-and-squaring Pade expm (Higham 2005)
// after Parlett-Reinsch balancing.
//
// Not here: where the steps go (transient.cpp), building the state space.
#pragma once

#include <Eigen/Dense>
#include <Eigen/SparseCore>
#include <cstdint>
#include <memory>
#include <unordered_map>

namespace ringdown::solver {

// Diagonal similarity D^-1 M D with power-of-two D chosen to balance row and
// column norms (Parlett & Reinsch, Numer. Math. 13, 1969; the radix-2
// variant of LAPACK's xGEBAL without permutations).
void balance(Eigen::MatrixXd& M, Eigen::VectorXd& d);

// The augmented system of one (configuration, input structure).
struct AugmentedSystem {
  int states = 0;           // r
  Eigen::MatrixXd M;        // (r+q) x (r+q)
  Eigen::MatrixXd E, F;     // descriptor form: E X' + F X = 0 (E = diag(C11, I))
  Eigen::MatrixXd balanced; // D^-1 M D
  Eigen::VectorXd scale;    // D
  double shift = 0;         // trace(M)/size, for the action (Al-Mohy & Higham sec. 3.1)
  double shifted_norm1 = 0; // || balanced - shift I ||_1
  // balanced - shift I in compressed rows, when the augmented matrix is large and sparse
  // (circuit matrices: a few entries per row); the action then costs O(nnz) per product
  // instead of O(N^2).
  bool use_sparse = false;
  Eigen::SparseMatrix<double, Eigen::RowMajor> sparse_shifted;
};

// Taylor degree m and number of sub-steps s of the action for one step length (Al-Mohy &
// Higham 2011, sec. 3): computed once per cached step length, m * s products per action.
struct TaylorPlan {
  int m = -1;
  long s = 0;
  long products() const { return static_cast<long>(m) * s; }
};
TaylorPlan plan_action(const AugmentedSystem& sys, double h);

// Floating-point operations of one action with `plan` (products and vector updates), and
// an estimate of one dense propagator's (Pade 13 with squarings, Higham 2005): the engine
// compares them to choose between the two for a step length used `uses` times.
double action_flops(const AugmentedSystem& sys, const TaylorPlan& plan);
double dense_propagator_flops(const AugmentedSystem& sys, double h);

// Builds M, E, F from the reduced blocks and the input system.
AugmentedSystem make_augmented(const Eigen::MatrixXd& A, const Eigen::MatrixXd& Bm,
                               const Eigen::MatrixXd& C11, const Eigen::MatrixXd& Gs,
                               const Eigen::MatrixXd& Bs, const Eigen::MatrixXd& S,
                               const Eigen::MatrixXd& H);

// expm(M h), through the best available method (see the top of this file).
Eigen::MatrixXd dense_propagator(const AugmentedSystem& sys, double h);

// Number of matrix-vector products expm_action would take for length h.
long expm_action_cost(const AugmentedSystem& sys, double h);

// y = expm(M h) v (y and v must not alias). `work` is scratch (resized once).
void expm_action(const AugmentedSystem& sys, double h, const Eigen::VectorXd& v,
                 Eigen::VectorXd& y, Eigen::VectorXd& work1, Eigen::VectorXd& work2);
// The same with the plan of plan_action(sys, h) (no parameter search per call).
void expm_action(const AugmentedSystem& sys, double h, const TaylorPlan& plan,
                 const Eigen::VectorXd& v, Eigen::VectorXd& y, Eigen::VectorXd& work1,
                 Eigen::VectorXd& work2);

// y = P x with fixed-size kernels for sizes <= 8 (y and x must not alias).
void multiply(const Eigen::MatrixXd& P, const Eigen::VectorXd& x, Eigen::VectorXd& y);

}  // namespace ringdown::solver
