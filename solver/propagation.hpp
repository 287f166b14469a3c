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
//    augmented size is <= 8;
//  - a truncated sparse propagator: the dense expm(M h) with the entries
//    dropped that are below the unit roundoff of their row's norm (in
//    balanced coordinates), kept in compressed rows when that leaves few of
//    them (long ladders: the propagator of a short step decays quickly away
//    from the diagonal). RunMatrix holds whichever of dense and truncated
//    sparse is cheaper to apply.
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

// expm(M h) as the action on the N unit vectors at once (the Taylor method of expm_action
// on an N x N block, unshifted: see propagation.cpp): m s sparse-times-dense products,
// about N actions' work, far below a dense expm on a large sparse system. For steps that are
// not stiff (the engine's kActionLimitPerState), where the action is what the engine would
// otherwise step with.
Eigen::MatrixXd propagator_by_action(const AugmentedSystem& sys, double h);

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

// Largest augmented size stepped by fixed-size kernels.
constexpr Eigen::Index kFixedKernelMax = 8;

// A propagator with its negligible entries dropped, in compressed rows.
// Entry (i, j) is dropped when |Pb_ij| <= u ||Pb_i,:||_1 / n, where Pb = Dr^-1 P Dc is the
// propagator in balanced coordinates (Dr, Dc: the balancing scales of the systems it maps
// to and from) and u the unit roundoff: the dropped part of each row then sums to at most
// u times that row's norm, so one step's truncation error in row i is at most
// u ||Pb_i,:||_1 ||x_b||_inf, below the bound n u ||Pb_i,:||_1 ||x_b||_inf on the rounding
// error of the dense product itself (Higham, Accuracy and Stability of Numerical
// Algorithms, 2nd ed. 2002, sec. 3.5).
struct SparsePropagator {
  Eigen::SparseMatrix<double, Eigen::RowMajor> P;
  double dropped = 0;  // largest dropped row sum relative to its row's norm (balanced)
};
SparsePropagator sparse_propagator(const Eigen::MatrixXd& P, const Eigen::VectorXd& row_scale,
                                   const Eigen::VectorXd& col_scale);

// A propagator as applied in the run: dense, or truncated sparse when that keeps at most
// kSparsePropagatorDensity of the entries (a compressed-row product costs about 3x a dense
// one per entry; measured on this machine class).
constexpr double kSparsePropagatorDensity = 0.25;
struct RunMatrix {
  Eigen::MatrixXd dense;  // empty when sparse
  Eigen::SparseMatrix<double, Eigen::RowMajor> sparse;
  bool is_sparse = false;
  // The sparse matrix again as runs of consecutive columns (what apply() uses): row i has
  // runs row_runs[i] .. row_runs[i+1]-1, run k starts at column run_col[k] and holds
  // run_len[k] values, packed in run_values (gaps of up to kRunGap zeros are filled in, so
  // a banded propagator is a few contiguous dot products per row, with no column index per
  // entry).
  std::vector<int> row_runs, run_col, run_len;
  std::vector<double> run_values;
  bool empty() const { return !is_sparse && dense.size() == 0; }
  Eigen::Index rows() const { return is_sparse ? sparse.rows() : dense.rows(); }
  Eigen::Index cols() const { return is_sparse ? sparse.cols() : dense.cols(); }
  double bytes() const;
  // y = P x (y and x must not alias; y is resized).
  void apply(const Eigen::VectorXd& x, Eigen::VectorXd& y) const;
  // The leading r x r block as a dense matrix.
  Eigen::MatrixXd top_left(Eigen::Index r) const;
};
constexpr int kRunGap = 2;
// Truncated sparse when the matrix is at least kSparseMinSize rows and the truncation keeps
// at most kSparsePropagatorDensity of it, else dense (fixed-size kernels apply to <= 8).
RunMatrix run_matrix(Eigen::MatrixXd P, const Eigen::VectorXd& row_scale,
                     const Eigen::VectorXd& col_scale);

}  // namespace ringdown::solver
