// Dense propagators, the Al-Mohy & Higham action, fixed-size kernels
// (propagation.hpp explains the roles).
#include "solver/propagation.hpp"

#include <algorithm>
#include <array>
#include <cmath>
#include <limits>
#include <vector>
#include <unsupported/Eigen/MatrixFunctions>

#if __has_include("solver/stiff_exponential.hpp")
#include "solver/stiff_exponential.hpp"
#define RINGDOWN_HAVE_STIFF_PROPAGATOR 1
#endif

namespace ringdown::solver {

namespace {

// Balancing sweeps stop when no row/column pair shrinks by more than this
// factor (the 0.95 of Parlett & Reinsch's ALGOL procedure, as kept in
// LAPACK xGEBAL; from memory), or after this many sweeps.
constexpr double kBalanceGain = 0.95;
constexpr int kBalanceSweeps = 64;

// Unit roundoff of IEEE double, the target of the Taylor truncation.
constexpr double kUnitRoundoff = 0x1p-53;
// Highest Taylor degree considered (m_max = 55 in Al-Mohy & Higham 2011,
// section 3).
constexpr int kMaxTaylorDegree = 55;
// The action uses compressed rows when the augmented matrix has at least this many rows
// and at most this fraction of nonzero entries: below, a dense product is as fast
// (measured on this machine class: a CSR product costs about 3x a dense one per entry).
constexpr Eigen::Index kSparseMinSize = 32;
constexpr double kSparseDensity = 0.1;
// theta_m, the largest ||X|| for which the degree-m Taylor remainder stays
// below the unit roundoff, is taken from the forward bound
// ||X||^{m+1}/(m+1)! <= u (Al-Mohy & Higham tabulate a sharper backward
// bound, which is close to this one for m >= 10). This factor keeps the
// bound on the safe side (0.8^{m+1} extra margin); the early-termination
// test of their Algorithm 3.2 then stops sooner when the series converges.
constexpr double kThetaSafety = 0.8;

double theta(int m) {
  // Tabulated once: plan_action runs for every off-sample instant the figures visit.
  static const std::array<double, kMaxTaylorDegree + 1> table = [] {
    std::array<double, kMaxTaylorDegree + 1> t{};
    for (int k = 1; k <= kMaxTaylorDegree; ++k)
      t[static_cast<std::size_t>(k)] =
          kThetaSafety * std::exp((std::lgamma(k + 2.0) + std::log(kUnitRoundoff)) / (k + 1.0));
    return t;
  }();
  return table[static_cast<std::size_t>(m)];
}

// Choice of (m, s) minimising m*s with s = ceil(norm / theta_m).
void taylor_parameters(double norm, int& m_best, long& s_best) {
  if (!(norm > 0)) {
    m_best = 0;
    s_best = 1;
    return;
  }
  double best = std::numeric_limits<double>::infinity();
  m_best = 1;
  s_best = 1;
  for (int m = 1; m <= kMaxTaylorDegree; ++m) {
    const double s = std::max(1.0, std::ceil(norm / theta(m)));
    if (m * s < best) {
      best = m * s;
      m_best = m;
      s_best = static_cast<long>(std::min(s, 1e15));
    }
  }
}

template <int N>
void multiply_fixed(const Eigen::MatrixXd& P, const Eigen::VectorXd& x, Eigen::VectorXd& y) {
  Eigen::Map<const Eigen::Matrix<double, N, N>> Pm(P.data());
  Eigen::Map<const Eigen::Matrix<double, N, 1>> xm(x.data());
  Eigen::Map<Eigen::Matrix<double, N, 1>> ym(y.data());
  ym.noalias() = Pm * xm;
}

}  // namespace

void balance(Eigen::MatrixXd& M, Eigen::VectorXd& d) {
  const Eigen::Index n = M.rows();
  d.setOnes(n);
  for (int sweep = 0; sweep < kBalanceSweeps; ++sweep) {
    bool done = true;
    for (Eigen::Index i = 0; i < n; ++i) {
      const double c = M.col(i).cwiseAbs().sum() - std::abs(M(i, i));
      const double r = M.row(i).cwiseAbs().sum() - std::abs(M(i, i));
      if (c == 0 || r == 0) continue;
      double f = 1, cc = c;
      double g = r / 2;
      while (cc < g) {
        f *= 2;
        cc *= 4;
      }
      g = r * 2;
      while (cc > g) {
        f /= 2;
        cc /= 4;
      }
      if ((cc + r) / f < kBalanceGain * (c + r)) {
        done = false;
        d(i) *= f;
        M.row(i) /= f;
        M.col(i) *= f;
      }
    }
    if (done) break;
  }
}

AugmentedSystem make_augmented(const Eigen::MatrixXd& A, const Eigen::MatrixXd& Bm,
                               const Eigen::MatrixXd& C11, const Eigen::MatrixXd& Gs,
                               const Eigen::MatrixXd& Bs, const Eigen::MatrixXd& S,
                               const Eigen::MatrixXd& H) {
  AugmentedSystem sys;
  const Eigen::Index r = A.rows();
  const Eigen::Index q = S.rows();
  const Eigen::Index N = r + q;
  sys.states = static_cast<int>(r);
  sys.M = Eigen::MatrixXd::Zero(N, N);
  sys.M.topLeftCorner(r, r) = A;
  sys.M.topRightCorner(r, q).noalias() = Bm * H;
  sys.M.bottomRightCorner(q, q) = S;
  sys.E = Eigen::MatrixXd::Zero(N, N);
  sys.E.topLeftCorner(r, r) = C11;
  sys.E.bottomRightCorner(q, q).setIdentity();
  sys.F = Eigen::MatrixXd::Zero(N, N);
  sys.F.topLeftCorner(r, r) = Gs;
  sys.F.topRightCorner(r, q).noalias() = -Bs * H;
  sys.F.bottomRightCorner(q, q) = -S;
  sys.balanced = sys.M;
  balance(sys.balanced, sys.scale);
  sys.shift = N > 0 ? sys.M.trace() / static_cast<double>(N) : 0.0;
  Eigen::MatrixXd shifted = sys.balanced;
  shifted.diagonal().array() -= sys.shift;
  sys.shifted_norm1 = N > 0 ? shifted.cwiseAbs().colwise().sum().maxCoeff() : 0.0;
  if (N >= kSparseMinSize) {
    const Eigen::Index nnz = (shifted.array() != 0.0).count();
    if (static_cast<double>(nnz) <= kSparseDensity * static_cast<double>(N) * static_cast<double>(N)) {
      sys.sparse_shifted = shifted.sparseView(0.0, 0.0);
      sys.sparse_shifted.makeCompressed();
      sys.use_sparse = true;
    }
  }
  return sys;
}

Eigen::MatrixXd dense_propagator(const AugmentedSystem& sys, double h) {
#ifdef RINGDOWN_HAVE_STIFF_PROPAGATOR
  ExponentialReport report;
  return stiff_propagator(sys.E, sys.F, h, &report);
#else
  // expm(M h) = D expm(D^-1 M D h) D^-1.
  const Eigen::MatrixXd Pb = (sys.balanced * h).exp();
  const Eigen::VectorXd inv = sys.scale.cwiseInverse();
  return sys.scale.asDiagonal() * Pb * inv.asDiagonal();
#endif
}

TaylorPlan plan_action(const AugmentedSystem& sys, double h) {
  TaylorPlan p;
  taylor_parameters(sys.shifted_norm1 * std::abs(h), p.m, p.s);
  return p;
}

long expm_action_cost(const AugmentedSystem& sys, double h) {
  return plan_action(sys, h).products();
}

double action_flops(const AugmentedSystem& sys, const TaylorPlan& plan) {
  const double N = static_cast<double>(sys.M.rows());
  const double product =
      sys.use_sparse ? 2.0 * static_cast<double>(sys.sparse_shifted.nonZeros()) : 2.0 * N * N + N;
  constexpr double kVectorOps = 6.0;  // copy, scale, add, two norms per product
  return static_cast<double>(plan.products()) * (product + kVectorOps * N);
}

double dense_propagator_flops(const AugmentedSystem& sys, double h) {
  // Pade 13: about 8 products' worth (6 products and one LU solve with n right-hand sides),
  // each 2 n^3 flops, plus one product per squaring, s = log2(||M h|| / theta_13) with
  // theta_13 = 5.37 (Higham 2005, Table 2.3; from memory). The equilibration and the rate
  // order around it are O(n^2) on sparse matrices and left out.
  const double N = static_cast<double>(sys.M.rows());
  const double squarings = std::max(0.0, std::ceil(std::log2(sys.shifted_norm1 * std::abs(h) / 5.37)));
  return 2.0 * N * N * N * (8.0 + squarings);
}

void expm_action(const AugmentedSystem& sys, double h, const Eigen::VectorXd& v,
                 Eigen::VectorXd& y, Eigen::VectorXd& b, Eigen::VectorXd& tmp) {
  expm_action(sys, h, plan_action(sys, h), v, y, b, tmp);
}

// Al-Mohy & Higham 2011, Algorithm 3.2 (expmv), on the balanced matrix with
// the shift mu = trace/n; departures: theta_m from the forward bound above
// instead of their table, no norm estimation of powers (p = 1 only).
void expm_action(const AugmentedSystem& sys, double h, const TaylorPlan& plan,
                 const Eigen::VectorXd& v, Eigen::VectorXd& y, Eigen::VectorXd& b,
                 Eigen::VectorXd& tmp) {
  const Eigen::Index N = sys.M.rows();
  const int m = plan.m;
  const long s = plan.s;
  y.resize(N);
  b.resize(N);
  tmp.resize(N);
  // Work in balanced coordinates: expm(Mh) v = D expm(Mb h) D^-1 v.
  y = v.cwiseQuotient(sys.scale);
  const double eta = std::exp(sys.shift * h / static_cast<double>(s));
  for (long i = 0; i < s; ++i) {
    b = y;
    double c1 = b.lpNorm<Eigen::Infinity>();
    for (int j = 1; j <= m; ++j) {
      if (sys.use_sparse) {
        tmp.noalias() = sys.sparse_shifted * b;
      } else {
        tmp.noalias() = sys.balanced * b;
        tmp -= sys.shift * b;
      }
      b = tmp * (h / (static_cast<double>(s) * j));
      const double c2 = b.lpNorm<Eigen::Infinity>();
      y += b;
      if (c1 + c2 <= kUnitRoundoff * y.lpNorm<Eigen::Infinity>()) break;
      c1 = c2;
    }
    y *= eta;
  }
  y = y.cwiseProduct(sys.scale);
}

// expm_action's loop on the identity, in balanced coordinates: expm(M h) = D Z D^-1 with
// Z = expm(Mb h) I; the early termination compares the largest entries of the block (every
// column starts as a unit vector, so they share a scale). Unlike expm_action, no shift:
// the factor e^{mu h} of a shift is rounded once per propagator, and a propagator applied
// 1e4 times turns that one rounding into a coherent drift of 1e4 u (measured 2e-12 of peak
// on the 200-state ladder of bench/, against 7e-14 without it). The plan is therefore
// taken for the unshifted norm.
Eigen::MatrixXd propagator_by_action(const AugmentedSystem& sys, double h) {
  const Eigen::Index N = sys.M.rows();
  TaylorPlan plan;
  const double norm = N > 0 ? sys.balanced.cwiseAbs().colwise().sum().maxCoeff() : 0.0;
  taylor_parameters(norm * std::abs(h), plan.m, plan.s);
  const int m = plan.m;
  const long s = plan.s;
  Eigen::MatrixXd Y = Eigen::MatrixXd::Identity(N, N), B(N, N), T(N, N);
  for (long i = 0; i < s; ++i) {
    B = Y;
    double c1 = B.lpNorm<Eigen::Infinity>();
    for (int j = 1; j <= m; ++j) {
      if (sys.use_sparse) {
        T.noalias() = sys.sparse_shifted * B;
        T += sys.shift * B;
      } else {
        T.noalias() = sys.balanced * B;
      }
      B = T * (h / (static_cast<double>(s) * j));
      const double c2 = B.lpNorm<Eigen::Infinity>();
      Y += B;
      if (c1 + c2 <= kUnitRoundoff * Y.lpNorm<Eigen::Infinity>()) break;
      c1 = c2;
    }
  }
  return sys.scale.asDiagonal() * Y * sys.scale.cwiseInverse().asDiagonal();
}

void multiply(const Eigen::MatrixXd& P, const Eigen::VectorXd& x, Eigen::VectorXd& y) {
  switch (P.rows()) {
    case 1: multiply_fixed<1>(P, x, y); return;
    case 2: multiply_fixed<2>(P, x, y); return;
    case 3: multiply_fixed<3>(P, x, y); return;
    case 4: multiply_fixed<4>(P, x, y); return;
    case 5: multiply_fixed<5>(P, x, y); return;
    case 6: multiply_fixed<6>(P, x, y); return;
    case 7: multiply_fixed<7>(P, x, y); return;
    case 8: multiply_fixed<8>(P, x, y); return;
    default: y.noalias() = P * x; return;
  }
}

SparsePropagator sparse_propagator(const Eigen::MatrixXd& P, const Eigen::VectorXd& row_scale,
                                   const Eigen::VectorXd& col_scale) {
  const Eigen::Index rows = P.rows(), cols = P.cols();
  SparsePropagator out;
  out.P.resize(rows, cols);
  std::vector<Eigen::Triplet<double>> kept;
  Eigen::VectorXd row(cols);
  for (Eigen::Index i = 0; i < rows; ++i) {
    // Row i in balanced coordinates: P_ij c_j / r_i.
    double norm = 0;
    for (Eigen::Index j = 0; j < cols; ++j) {
      row(j) = std::abs(P(i, j)) * col_scale(j) / row_scale(i);
      norm += row(j);
    }
    const double cut = kUnitRoundoff * norm / static_cast<double>(cols);
    double dropped = 0;
    for (Eigen::Index j = 0; j < cols; ++j) {
      if (row(j) > cut)
        kept.emplace_back(static_cast<int>(i), static_cast<int>(j), P(i, j));
      else
        dropped += row(j);
    }
    if (norm > 0) out.dropped = std::max(out.dropped, dropped / norm);
  }
  out.P.setFromTriplets(kept.begin(), kept.end());
  out.P.makeCompressed();
  return out;
}

double RunMatrix::bytes() const {
  if (!is_sparse) return 8.0 * static_cast<double>(dense.size());
  return 12.0 * static_cast<double>(sparse.nonZeros()) + 8.0 * static_cast<double>(sparse.rows()) +
         8.0 * static_cast<double>(run_values.size()) + 8.0 * static_cast<double>(run_col.size());
}

namespace {

void build_runs(RunMatrix& m) {
  const auto& S = m.sparse;
  m.row_runs.assign(1, 0);
  m.run_col.clear();
  m.run_len.clear();
  m.run_values.clear();
  for (int i = 0; i < S.outerSize(); ++i) {
    int end = -1;  // one past the last column of the current run of this row
    for (Eigen::SparseMatrix<double, Eigen::RowMajor>::InnerIterator it(S, i); it; ++it) {
      const int col = static_cast<int>(it.col());
      if (end >= 0 && col - end <= kRunGap) {
        for (; end < col; ++end) {  // fill the gap
          m.run_values.push_back(0.0);
          ++m.run_len.back();
        }
        ++m.run_len.back();
      } else {
        m.run_col.push_back(col);
        m.run_len.push_back(1);
      }
      m.run_values.push_back(it.value());
      end = col + 1;
    }
    m.row_runs.push_back(static_cast<int>(m.run_col.size()));
  }
}

}  // namespace

void RunMatrix::apply(const Eigen::VectorXd& x, Eigen::VectorXd& y) const {
  if (is_sparse) {
    const Eigen::Index rows = static_cast<Eigen::Index>(row_runs.size()) - 1;
    y.resize(rows);
    const double* v = run_values.data();
    const double* xs = x.data();
    for (Eigen::Index i = 0; i < rows; ++i) {
      double a0 = 0, a1 = 0;
      for (int r = row_runs[static_cast<std::size_t>(i)]; r < row_runs[static_cast<std::size_t>(i) + 1]; ++r) {
        const double* xp = xs + run_col[static_cast<std::size_t>(r)];
        const int len = run_len[static_cast<std::size_t>(r)];
        int q = 0;
        for (; q + 1 < len; q += 2) {
          a0 += v[q] * xp[q];
          a1 += v[q + 1] * xp[q + 1];
        }
        if (q < len) a0 += v[q] * xp[q];
        v += len;
      }
      y(i) = a0 + a1;
    }
  } else if (dense.rows() == dense.cols()) {
    y.resize(dense.rows());
    multiply(dense, x, y);
  } else {
    y.resize(dense.rows());
    y.noalias() = dense * x;
  }
}

Eigen::MatrixXd RunMatrix::top_left(Eigen::Index r) const {
  if (!is_sparse) return dense.topLeftCorner(r, r);
  return Eigen::MatrixXd(sparse.topLeftCorner(r, r));
}

RunMatrix run_matrix(Eigen::MatrixXd P, const Eigen::VectorXd& row_scale,
                     const Eigen::VectorXd& col_scale) {
  RunMatrix out;
  if (P.rows() >= kSparseMinSize) {
    SparsePropagator sp = sparse_propagator(P, row_scale, col_scale);
    if (static_cast<double>(sp.P.nonZeros()) <=
        kSparsePropagatorDensity * static_cast<double>(P.rows()) * static_cast<double>(P.cols())) {
      out.sparse = std::move(sp.P);
      out.is_sparse = true;
      build_runs(out);
      return out;
    }
  }
  out.dense = std::move(P);
  return out;
}

}  // namespace ringdown::solver
