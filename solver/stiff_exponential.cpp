// Multilevel block elimination for expm(-E^-1 F h) of stiff descriptor systems.
//
// The method is the project's own design (STIFF.md, "A method that held 1e-10 at every
// span"); this file implements it as a recursion:
//   1. order the states fast to slow by greedy elimination on Schur complements of (E, F)
//      and record a rate per state (stiffness_rates);
//   2. cut the ordering at the largest rate gap into fast states F and slow states S;
//   3. find the slow manifold x_F = L x_S of the descriptor system by Newton's method on
//          R(L) = F_FF L + F_FS + (E_FF L + E_FS) A_s(L) = 0,
//          A_s(L) = -(E_SS + E_SF L)^-1 (F_SS + F_SF L),
//      each step a generalised Sylvester equation F_f dL + E_f dL A_s = -R, solved column by
//      column on a complex Schur form of A_s with shifted LUs of (F_f + t E_f); residuals and
//      L are kept in 80-bit long double, and convergence is judged row by row (a normwise
//      residual let the rows of small currents stop at 1e-11 relative: measured 3e-8 of
//      peak on a random network). The cross terms E_FS, E_SF of a non-diagonal E
//      (capacitors between nodes) are carried exactly (STIFF.md caveat);
//   4. the fast block in the coordinates y = x_F - L x_S is the descriptor pair
//          E_f = E_FF - P E_SF, F_f = F_FF - P F_SF, P = (E_FF L + E_FS)(E_SS + E_SF L)^-1,
//      and the initial-layer correction z = x_S - K y decouples the slow block exactly:
//          A_s K - K A_f = (E_SS + E_SF L)^-1 (E_SF A_f + F_SF), A_f = -E_f^-1 F_f,
//      solved (as A_s W E_f + W F_f = rhs, K = W E_f - M_S^-1 E_SF) with the same shifts;
//   5. recurse on the slow pair (E_SS + E_SF L, F_SS + F_SF L) and on the fast pair until
//      a block's rate span is small (or the block is negligible or near identity per step),
//      where one long double expm is taken (Eigen's scaling and squaring Pade, Higham 2005,
//      "The scaling and squaring method for the matrix exponential revisited", SIAM J.
//      Matrix Anal. Appl. 26(4); Eigen 3.4 has a 64-bit-mantissa branch of it);
//   6. assemble Phi = T diag(Phi_s, Phi_f) T^-1 in the original coordinates, with
//      T = [[I, K], [L, I + L K]] (S first) and its exact inverse [[I + K L, -K], [-L, I]].
// A cut is rejected when Newton does not converge, or when the spectra of A_s and A_f are
// not separated in modulus (Newton found another invariant subspace); with no accepted cut
// the block falls back to the long double Pade-13 expm.
// Departures from STIFF.md: the cut rule does not depend on h (largest gap first, both
// sides recursed, long double leaves); see docs/stiff.md.
// Not here: the action of expm on a vector (Al-Mohy & Higham 2011) for large sparse
// systems, which the sparse engine does.
#include "solver/stiff_exponential.hpp"

#include <algorithm>
#include <cmath>
#include <complex>
#include <limits>
#include <numeric>
#include <sstream>
#include <stdexcept>
#include <unsupported/Eigen/MatrixFunctions>

namespace ringdown::solver {
namespace {

using Mat = Eigen::MatrixXd;
using CMat = Eigen::MatrixXcd;
using LMat = Eigen::Matrix<long double, Eigen::Dynamic, Eigen::Dynamic>;
using Index = Eigen::Index;

// Rate span below which one double expm is accurate enough. The task suggested 1e6, but
// tests/solver/stiff_propagator_test.cpp measured 2.8e-10 of peak for the plain expm at a
// span of 1e6 on all four networks (error ~ 2.5 eps x span), so 1e4 keeps the cheap path
// near 3e-12 and the block method (10-25x the cost at n <= 21) takes over above it.
constexpr double kCheapSpan = 1e4;
// A leaf block's rate span for its long double expm: the error is about the 80-bit epsilon
// (5.4e-20) times the span (STIFF.md: "the slowest mode's decay rate ... off by eps x
// span"); 1e3 leaves a wide margin for non-normal blocks (rates are estimates of the
// eigenvalues, not bounds). Chosen, checked by the mpmath comparison.
constexpr double kLeafSpan = 1e3;
// A block whose slowest rate decays it by e^-50 per step contributes nothing measurable
// after one step; take its expm directly (STIFF.md step 6).
constexpr double kNegligibleDecay = 50.0;
// Smallest rate gap worth a cut: below it Newton's start L0 = -F_FF^-1 F_FS is poor and the
// separation check fails too often (chosen, no source; random networks need gaps this
// small, their rates being spread evenly in log scale).
constexpr double kMinGap = 4.0;
// Newton: iterations before giving up (STIFF.md: "about 10 steps"), the relative residual
// that ends the iteration (a few 80-bit epsilons times n), and the worst one still accepted
// when the iteration stagnates (float64 level).
constexpr int kNewtonMaxIterations = 12;
constexpr long double kNewtonTarget = 1e-18L;
constexpr long double kNewtonAccept = 1e-14L;
// Required ratio min|lambda(A_f)| / max|lambda(A_s)| for a cut (chosen, no source).
constexpr double kMinSeparation = 2.0;

double max_abs(const Mat& M) { return M.size() ? M.cwiseAbs().maxCoeff() : 0.0; }

// --- balancing -----------------------------------------------------------------------

// Diagonal d (powers of two) such that D^-1 M D has off-diagonal row and column 1-norms
// within a factor 2 of each other: the Parlett-Reinsch (1969) balancing as in LAPACK
// xGEBAL, without the permutation step. Powers of two make the similarity exact.
template <class MatT>
Eigen::VectorXd balance_scaling(const MatT& M) {
  const Index n = M.rows();
  Eigen::VectorXd d = Eigen::VectorXd::Ones(n);
  for (int sweep = 0; sweep < 200; ++sweep) {
    bool changed = false;
    for (Index i = 0; i < n; ++i) {
      double c = 0, r = 0;
      for (Index j = 0; j < n; ++j) {
        if (j == i) continue;
        c += std::abs(static_cast<double>(M(j, i))) * d(i) / d(j);
        r += std::abs(static_cast<double>(M(i, j))) * d(j) / d(i);
      }
      if (!(c > 0) || !(r > 0) || !std::isfinite(c) || !std::isfinite(r)) continue;
      const double s = c + r;
      double f = 1;
      while (c < r / 2) { c *= 2; r /= 2; f *= 2; }
      while (c >= 2 * r) { c /= 2; r *= 2; f /= 2; }
      if (c + r < 0.95 * s) {  // LAPACK's acceptance factor
        d(i) *= f;
        changed = true;
      }
    }
    if (!changed) break;
  }
  return d;
}

// --- expm of one block -----------------------------------------------------------------

// Long double A = -E^-1 F h, balanced, Eigen's Pade expm at 64-bit mantissa, unbalanced.
Mat leaf_expm(const Mat& E, const Mat& F, double h) {
  const LMat El = E.cast<long double>();
  const LMat Fl = F.cast<long double>();
  Eigen::PartialPivLU<LMat> lu(El);
  LMat A = -(lu.solve(Fl)) * static_cast<long double>(h);
  const Eigen::VectorXd d = balance_scaling(A);
  const Index n = A.rows();
  for (Index i = 0; i < n; ++i)
    for (Index j = 0; j < n; ++j) A(i, j) *= static_cast<long double>(d(j) / d(i));
  LMat P = A.exp();
  for (Index i = 0; i < n; ++i)
    for (Index j = 0; j < n; ++j) P(i, j) *= static_cast<long double>(d(i) / d(j));
  return P.cast<double>();
}

void check_input(const Mat& E, const Mat& F, double h) {
  if (E.rows() != E.cols() || F.rows() != F.cols() || E.rows() != F.rows())
    throw std::invalid_argument("stiff_propagator: E and F must be square and the same size");
  if (!E.allFinite() || !F.allFinite() || !std::isfinite(h))
    throw std::invalid_argument("stiff_propagator: E, F and h must be finite");
}

// Scales row i of E and F by the power of two that brings max_j |E_ij| into [1, 2): the
// states have different units (volts, amperes), their rows of E different scales.
void row_equilibrate(Mat& E, Mat& F) {
  for (Index i = 0; i < E.rows(); ++i) {
    const double m = E.row(i).cwiseAbs().maxCoeff();
    if (!(m > 0))
      throw std::domain_error("stiff_propagator: E is singular (a zero row: a state without "
                              "capacitance or inductance)");
    const double s = std::ldexp(1.0, -std::ilogb(m));
    E.row(i) *= s;
    F.row(i) *= s;
  }
}

// LU of a row-equilibrated E; a pivot below 1e-3 float64 epsilons of the largest entry (1)
// means E is numerically singular (threshold chosen, no source).
Eigen::PartialPivLU<Mat> checked_lu(const Mat& E) {
  Eigen::PartialPivLU<Mat> lu(E);
  const Mat U = lu.matrixLU().triangularView<Eigen::Upper>();
  const double big = max_abs(E);
  for (Index i = 0; i < U.rows(); ++i)
    if (!(std::abs(U(i, i)) > big * std::numeric_limits<double>::epsilon() * 1e-3))
      throw std::domain_error("stiff_propagator: E is singular (a state without capacitance "
                              "or inductance)");
  return lu;
}

// E^-1 F for a row-equilibrated E, with the singularity test of checked_lu. A diagonal E
// (capacitors to a reference, uncoupled inductors: the common case) is a row scaling, the
// same numbers the LU solve would give (no pivoting, no fill) at O(n^2) instead of O(n^3).
Mat solve_equilibrated(const Mat& E, const Mat& F) {
  const Index n = E.rows();
  bool diagonal = true;
  for (Index j = 0; j < n && diagonal; ++j)
    for (Index i = 0; i < n; ++i)
      if (i != j && E(i, j) != 0) { diagonal = false; break; }
  if (!diagonal) return checked_lu(E).solve(F);
  const double big = max_abs(E);
  Mat A(n, F.cols());
  for (Index i = 0; i < n; ++i)
    if (!(std::abs(E(i, i)) > big * std::numeric_limits<double>::epsilon() * 1e-3))
      throw std::domain_error("stiff_propagator: E is singular (a state without capacitance "
                              "or inductance)");
  for (Index j = 0; j < F.cols(); ++j)
    for (Index i = 0; i < n; ++i) A(i, j) = F(i, j) / E(i, i);
  return A;
}

// expm(A) after the exact power-of-two balancing (Eigen's scaling and squaring Pade,
// Higham 2005): the cheap path of stiff_propagator and all of plain_propagator.
Mat balanced_expm(Mat A) {
  const Eigen::VectorXd d = balance_scaling(A);
  const Index n = A.rows();
  for (Index j = 0; j < n; ++j)
    for (Index i = 0; i < n; ++i) A(i, j) *= d(j) / d(i);
  Mat P = A.exp();
  for (Index j = 0; j < n; ++j)
    for (Index i = 0; i < n; ++i) P(i, j) *= d(i) / d(j);
  return P;
}

// --- the split ---------------------------------------------------------------------------

struct Split {
  LMat L;      // slow manifold x_F = L x_S, nf x ns
  Mat K;       // initial-layer correction, ns x nf
  Mat Es, Fs;  // slow descriptor pair (E_SS + E_SF L, F_SS + F_SF L)
  Mat Ef, Ff;  // fast descriptor pair in y = x_F - L x_S
  long double residual = 0;
  int iterations = 0;
  std::string why;  // reason of a rejection
};

struct Blocks {
  LMat EFF, EFS, ESF, ESS, FFF, FFS, FSF, FSS;
};

// Everything that follows from L: A_s, the residual, the fast pair, all in long double.
struct ManifoldState {
  LMat Ms, Ns, As, R, P, Ef, Ff;
  long double residual = 0;
};

ManifoldState evaluate(const Blocks& b, const LMat& L) {
  ManifoldState s;
  s.Ms = b.ESS + b.ESF * L;
  s.Ns = b.FSS + b.FSF * L;
  Eigen::PartialPivLU<LMat> lu(s.Ms);
  s.As = -lu.solve(s.Ns);
  const LMat EL = b.EFF * L + b.EFS;
  s.R = b.FFF * L + b.FFS + EL * s.As;
  // P = EL Ms^-1, i.e. P^T = Ms^-T EL^T.
  const LMat Pt = lu.transpose().solve(EL.transpose());  // evaluate before transposing
  s.P = Pt.transpose();
  s.Ef = b.EFF - s.P * b.ESF;
  s.Ff = b.FFF - s.P * b.FSF;
  // Row by row: each row of R against the sizes of the terms that make it (rows of
  // different states have different scales; a normwise measure would let small rows,
  // e.g. small currents, stop early).
  const LMat scale = b.FFF.cwiseAbs() * L.cwiseAbs() + b.FFS.cwiseAbs() +
                     EL.cwiseAbs() * s.As.cwiseAbs();
  s.residual = 0;
  for (Index i = 0; i < s.R.rows(); ++i) {
    const long double si = scale.row(i).maxCoeff();
    const long double ri = s.R.row(i).cwiseAbs().maxCoeff();
    if (ri > 0) s.residual = std::max(s.residual, si > 0 ? ri / si : ri);
  }
  return s;
}

// Shifted LUs of (Ff + t_j Ef) for the diagonal t_j of the Schur form of As.
struct ShiftedSolver {
  Eigen::ComplexSchur<CMat> schur;
  std::vector<Eigen::PartialPivLU<CMat>> lus;
  ShiftedSolver(const Mat& As, const Mat& Ef, const Mat& Ff) : schur(As.cast<std::complex<double>>()) {
    const CMat& T = schur.matrixT();
    const CMat Efc = Ef.cast<std::complex<double>>();
    const CMat Ffc = Ff.cast<std::complex<double>>();
    lus.reserve(static_cast<std::size_t>(T.rows()));
    for (Index j = 0; j < T.rows(); ++j) lus.emplace_back(Ffc + T(j, j) * Efc);
  }
  // X with Ff X + Ef X As = Rhs (nf x ns).
  Mat solve_right(const Mat& Ef, const Mat& Rhs) const {
    const CMat& T = schur.matrixT();
    const CMat& Q = schur.matrixU();
    const CMat Efc = Ef.cast<std::complex<double>>();
    const CMat RQ = Rhs.cast<std::complex<double>>() * Q;
    CMat Y(Rhs.rows(), Rhs.cols());
    for (Index j = 0; j < T.cols(); ++j) {
      Eigen::VectorXcd rhs = RQ.col(j);
      if (j > 0) rhs -= Efc * (Y.leftCols(j) * T.col(j).head(j));
      Y.col(j) = lus[static_cast<std::size_t>(j)].solve(rhs);
    }
    return (Y * Q.adjoint()).real();
  }
  // W with As W Ef + W Ff = Rhs (ns x nf).
  Mat solve_left(const Mat& Ef, const Mat& Rhs) const {
    const CMat& T = schur.matrixT();
    const CMat& Q = schur.matrixU();
    const CMat Efc = Ef.cast<std::complex<double>>();
    const CMat QR = Q.adjoint() * Rhs.cast<std::complex<double>>();
    const Index ns = T.rows();
    CMat Wt(Rhs.rows(), Rhs.cols());
    for (Index i = ns - 1; i >= 0; --i) {
      Eigen::RowVectorXcd rhs = QR.row(i);
      if (i + 1 < ns) rhs -= (T.row(i).tail(ns - 1 - i) * Wt.bottomRows(ns - 1 - i)) * Efc;
      // w (Ff + t Ef) = rhs  <=>  (Ff + t Ef)^T w^T = rhs^T
      const Eigen::VectorXcd w = lus[static_cast<std::size_t>(i)].transpose().solve(rhs.transpose());
      Wt.row(i) = w.transpose();
    }
    return (Q * Wt).real();
  }
};

double spectral_radius(const CMat& T) {
  double r = 0;
  for (Index i = 0; i < T.rows(); ++i) r = std::max(r, std::abs(T(i, i)));
  return r;
}

// Newton on the slow manifold, separation check, initial-layer correction.
bool try_split(const Mat& E, const Mat& F, const std::vector<int>& fi, const std::vector<int>& si,
               Split& out) {
  Blocks b;
  const LMat El = E.cast<long double>(), Fl = F.cast<long double>();
  b.EFF = El(fi, fi); b.EFS = El(fi, si); b.ESF = El(si, fi); b.ESS = El(si, si);
  b.FFF = Fl(fi, fi); b.FFS = Fl(fi, si); b.FSF = Fl(si, fi); b.FSS = Fl(si, si);

  // Start: the quasi-static manifold L0 = -F_FF^-1 F_FS (STIFF.md step 4).
  Eigen::PartialPivLU<LMat> luF(b.FFF);
  LMat L = -luF.solve(b.FFS);
  if (!L.allFinite()) { out.why = "F_FF singular"; return false; }

  ManifoldState s = evaluate(b, L);
  long double previous = std::numeric_limits<long double>::infinity();
  int it = 0;
  for (;; ++it) {
    if (!s.R.allFinite() || !s.As.allFinite()) { out.why = "non-finite residual"; return false; }
    if (s.residual <= kNewtonTarget) break;
    if (s.residual > 0.5L * previous) {  // stagnation: accept only at float64 level
      if (s.residual <= kNewtonAccept) break;
      out.why = "Newton stagnated";
      return false;
    }
    if (it >= kNewtonMaxIterations) {
      if (s.residual <= kNewtonAccept) break;
      out.why = "Newton did not converge";
      return false;
    }
    previous = s.residual;
    const ShiftedSolver solver(s.As.cast<double>(), s.Ef.cast<double>(), s.Ff.cast<double>());
    const Mat dL = solver.solve_right(s.Ef.cast<double>(), -s.R.cast<double>());
    if (!dL.allFinite()) { out.why = "singular shifted pencil"; return false; }
    L += dL.cast<long double>();
    s = evaluate(b, L);
  }
  out.iterations = it;
  out.residual = s.residual;

  const Mat As = s.As.cast<double>();
  out.Ef = s.Ef.cast<double>();
  out.Ff = s.Ff.cast<double>();
  const ShiftedSolver solver(As, out.Ef, out.Ff);

  // Separation: max |lambda(A_s)| against min |lambda(A_f)| = 1 / rho(F_f^-1 E_f).
  const double rho_s = spectral_radius(solver.schur.matrixT());
  Eigen::PartialPivLU<Mat> luFf(out.Ff);
  const Mat Finv_E = luFf.solve(out.Ef);
  if (!Finv_E.allFinite()) { out.why = "fast block singular"; return false; }
  const double rho_f_inv = Finv_E.eigenvalues().cwiseAbs().maxCoeff();
  if (!(rho_s * rho_f_inv * kMinSeparation < 1.0)) {
    std::ostringstream m;
    m << "spectra not separated (max|slow| " << rho_s << ", min|fast| " << 1.0 / rho_f_inv << ")";
    out.why = m.str();
    return false;
  }

  // Initial-layer correction: As W Ef + W Ff = Ms^-1 F_SF + As Ms^-1 E_SF, K = W Ef - Ms^-1 E_SF.
  Eigen::PartialPivLU<LMat> luM(s.Ms);
  const LMat MinvF = luM.solve(b.FSF);
  const LMat MinvE = luM.solve(b.ESF);
  const LMat Rk = MinvF + s.As * MinvE;
  Mat W = solver.solve_left(out.Ef, Rk.cast<double>());
  // One step of refinement with the residual in long double.
  {
    const LMat Wl = W.cast<long double>();
    const LMat res = Rk - (s.As * Wl * s.Ef + Wl * s.Ff);
    W += solver.solve_left(out.Ef, res.cast<double>());
  }
  out.K = (W.cast<long double>() * s.Ef - MinvE).cast<double>();
  if (!out.K.allFinite()) { out.why = "initial-layer correction failed"; return false; }

  out.L = L;
  out.Es = s.Ms.cast<double>();
  out.Fs = s.Ns.cast<double>();
  return true;
}

// --- recursion ---------------------------------------------------------------------------

struct Context {
  ExponentialReport* report;
  long double worst_residual = 0;
  int max_levels = 0;
  bool any_cut = false;
  void note(const std::string& line) {
    if (report) report->note += line + "\n";
  }
};

Mat propagate(const Mat& E, const Mat& F, double h, int depth, Context& ctx) {
  const Index n = E.rows();
  if (n == 0) return Mat(0, 0);
  const RateOrder ro = stiffness_rates(E, F);
  const double span = rate_span(ro);
  const double rmax = *std::max_element(ro.rate.begin(), ro.rate.end());
  double rmin_pos = rmax;
  bool any_zero = false;
  for (double r : ro.rate) {
    if (r > 0) rmin_pos = std::min(rmin_pos, r);
    else any_zero = true;
  }
  const double ah = std::abs(h);
  // Leaves: small span (one long double expm is accurate), a block that dies within one
  // step, or one that barely moves (expm needs no squaring; nothing to gain by splitting).
  const bool negligible = !any_zero && rmin_pos * ah >= kNegligibleDecay;
  const bool near_identity = rmax * ah <= 1.0;
  if (n == 1 || negligible || near_identity || span <= kLeafSpan) {
    std::ostringstream m;
    m << std::string(static_cast<std::size_t>(2 * depth), ' ') << "n=" << n << " leaf, rates "
      << rmin_pos << ".." << rmax << " 1/s" << (negligible ? " (negligible)" : "")
      << (near_identity ? " (near identity)" : "");
    ctx.note(m.str());
    return leaf_expm(E, F, h);
  }

  // Candidate cuts: after position k-1, gap = min fast rate / max slow rate.
  const Index N = n;
  std::vector<double> prefix_min(static_cast<std::size_t>(N)), suffix_max(static_cast<std::size_t>(N));
  for (Index k = 0; k < N; ++k)
    prefix_min[k] = k ? std::min(prefix_min[k - 1], ro.rate[k]) : ro.rate[k];
  for (Index k = N - 1; k >= 0; --k)
    suffix_max[k] = k + 1 < N ? std::max(suffix_max[k + 1], ro.rate[k]) : ro.rate[k];
  std::vector<std::pair<double, Index>> cuts;  // (gap, number of fast states)
  for (Index k = 1; k < N; ++k) {
    if (ro.pair_with_next[k - 1]) continue;
    const double fast = prefix_min[k - 1], slow = suffix_max[k];
    if (!(fast > 0)) continue;
    const double gap = slow > 0 ? fast / slow : std::numeric_limits<double>::infinity();
    if (gap >= kMinGap) cuts.emplace_back(gap, k);
  }
  std::sort(cuts.begin(), cuts.end(), [](auto& a, auto& b) { return a.first > b.first; });

  for (const auto& [gap, k] : cuts) {
    std::vector<int> fi(ro.order.begin(), ro.order.begin() + k);
    std::vector<int> si(ro.order.begin() + k, ro.order.end());
    Split sp;
    std::ostringstream m;
    m << std::string(static_cast<std::size_t>(2 * depth), ' ') << "n=" << n << " cut " << k
      << "|" << n - k << " gap " << gap;
    if (!try_split(E, F, fi, si, sp)) {
      ctx.note(m.str() + ": rejected, " + sp.why);
      continue;
    }
    m << ": Newton " << sp.iterations << " steps, residual " << static_cast<double>(sp.residual)
      << ", max|L| " << static_cast<double>(sp.L.cwiseAbs().maxCoeff()) << ", max|K| "
      << max_abs(sp.K);
    ctx.note(m.str());
    ctx.any_cut = true;
    ctx.max_levels = std::max(ctx.max_levels, depth + 1);
    ctx.worst_residual = std::max(ctx.worst_residual, sp.residual);

    const Mat Ps = propagate(sp.Es, sp.Fs, h, depth + 1, ctx);
    const Mat Pf = propagate(sp.Ef, sp.Ff, h, depth + 1, ctx);
    const Mat L = sp.L.cast<double>();
    const Mat& K = sp.K;
    const Index nf = k, ns = n - k;
    const Mat KL = K * L;    // ns x ns
    const Mat LK = L * K;    // nf x nf
    const Mat PfL = Pf * L;  // nf x ns
    const Mat PsK = Ps * K;  // ns x nf
    const Mat IpKL = Mat::Identity(ns, ns) + KL;
    const Mat IpLK = Mat::Identity(nf, nf) + LK;
    Mat Phi(n, n);
    Phi(si, si) = Ps * IpKL - K * PfL;
    Phi(si, fi) = K * Pf - PsK;
    Phi(fi, si) = L * (Ps * IpKL) - IpLK * PfL;
    Phi(fi, fi) = IpLK * Pf - L * PsK;
    return Phi;
  }
  {
    std::ostringstream m;
    m << std::string(static_cast<std::size_t>(2 * depth), ' ') << "n=" << n << " span " << span
      << ": no cut accepted, long double Pade-13 expm";
    ctx.note(m.str());
  }
  return leaf_expm(E, F, h);
}

}  // namespace

// --- public ---------------------------------------------------------------------------------

RateOrder stiffness_rates(const Mat& E, const Mat& F) {
  const Index n = E.rows();
  RateOrder out;
  Mat Ew = E, Fw = F;
  std::vector<bool> active(static_cast<std::size_t>(n), true);
  const double tiny = std::numeric_limits<double>::min();
  // The rate of a state depends only on its own row and column of the current Schur
  // complement and on the diagonal of E; each is cached and recomputed only when an
  // elimination touched it, and an elimination updates only the rows and columns coupled to
  // the eliminated block (exact zeros elsewhere stay zero). Circuit matrices are sparse, so
  // this is O(n^2) instead of O(n^3) on a ladder, with the same rates, order and ties as the
  // plain dense sweep (same arithmetic on every entry that changes).
  std::vector<double> row_rate(static_cast<std::size_t>(n), 0.0);
  std::vector<Index> row_partner(static_cast<std::size_t>(n), -1);
  auto rate_of = [&](Index i) {
    const double ei = std::max(std::abs(Ew(i, i)), tiny);
    double r = std::abs(Fw(i, i)) / ei;
    Index partner = -1;
    for (Index j = 0; j < n; ++j) {
      if (j == i || !active[j]) continue;
      const double fij = Fw(i, j);
      if (fij == 0) continue;  // c = 0 can never beat r >= 0
      const double ej = std::max(std::abs(Ew(j, j)), tiny);
      const double c = std::sqrt(std::abs(fij * Fw(j, i)) / (ei * ej));
      if (c > r) { r = c; partner = j; }
    }
    row_rate[static_cast<std::size_t>(i)] = r;
    row_partner[static_cast<std::size_t>(i)] = partner;
  };
  for (Index i = 0; i < n; ++i) rate_of(i);
  std::vector<char> dirty(static_cast<std::size_t>(n), 0);
  std::vector<Index> rows, cols;
  Index left = n;
  while (left > 0) {
    double best = -1;
    Index bi = -1, bj = -1;  // bj >= 0: the coupling term won, partner bj
    for (Index i = 0; i < n; ++i) {
      if (!active[i]) continue;
      const double r = row_rate[static_cast<std::size_t>(i)];
      if (r > best) { best = r; bi = i; bj = row_partner[static_cast<std::size_t>(i)]; }
    }
    if (!(best > 0)) {  // the rest has no rate (pure integrators, constant inputs)
      for (Index i = 0; i < n; ++i)
        if (active[i]) {
          out.order.push_back(static_cast<int>(i));
          out.rate.push_back(0.0);
          out.pair_with_next.push_back(false);
        }
      break;
    }
    std::vector<Index> blk{bi};
    if (bj >= 0) {
      const double det = Fw(bi, bi) * Fw(bj, bj) - Fw(bi, bj) * Fw(bj, bi);
      if (std::abs(det) > 1e-8 * std::abs(Fw(bi, bj) * Fw(bj, bi))) blk.push_back(bj);
    }
    // Schur complement update of the rest (quasi-static elimination of the block):
    // F_RR -= F_RB F_BB^-1 F_BR, E_RR -= E_RB F_BB^-1 F_BR.
    for (std::size_t q = 0; q < blk.size(); ++q) {
      active[blk[q]] = false;
      out.order.push_back(static_cast<int>(blk[q]));
      out.rate.push_back(best);
      out.pair_with_next.push_back(q + 1 < blk.size());
    }
    left -= static_cast<Index>(blk.size());
    const Index m = static_cast<Index>(blk.size());
    Mat FBB(m, m);
    for (Index a = 0; a < m; ++a)
      for (Index c = 0; c < m; ++c) FBB(a, c) = Fw(blk[a], blk[c]);
    const Mat FBBinv = FBB.inverse();
    // Rows with a nonzero in the block's columns (of F or E), columns with a nonzero in the
    // block's rows of F: only these entries change. A non-finite inverse (a singular pivot)
    // would spread NaN everywhere: then update every entry, as the dense sweep does.
    const bool finite = FBBinv.allFinite();
    rows.clear();
    cols.clear();
    for (Index i = 0; i < n; ++i) {
      if (!active[i]) continue;
      bool in_rows = !finite, in_cols = !finite;
      for (Index a = 0; a < m && !(in_rows && in_cols); ++a) {
        if (Fw(i, blk[a]) != 0 || Ew(i, blk[a]) != 0) in_rows = true;
        if (Fw(blk[a], i) != 0) in_cols = true;
      }
      if (in_rows) rows.push_back(i);
      if (in_cols) cols.push_back(i);
    }
    for (Index i : rows) {
      for (Index j : cols) {
        double df = 0, de = 0;
        for (Index a = 0; a < m; ++a)
          for (Index c = 0; c < m; ++c) {
            const double t = FBBinv(a, c) * Fw(blk[c], j);
            df += Fw(i, blk[a]) * t;
            de += Ew(i, blk[a]) * t;
          }
        Fw(i, j) -= df;
        Ew(i, j) -= de;
      }
    }
    // States whose rate may have changed: the updated rows and columns, and the states
    // coupled to one whose diagonal of E changed.
    if (!finite) {
      for (Index i = 0; i < n; ++i)
        if (active[i]) rate_of(i);
      continue;
    }
    for (Index i : rows) dirty[static_cast<std::size_t>(i)] = 1;
    for (Index j : cols) {
      if (dirty[static_cast<std::size_t>(j)] == 1) {  // in rows and columns: E_jj changed
        for (Index k = 0; k < n; ++k)
          if (active[k] && k != j && Fw(k, j) != 0 && Fw(j, k) != 0 && !dirty[static_cast<std::size_t>(k)])
            dirty[static_cast<std::size_t>(k)] = 2;
      }
      if (!dirty[static_cast<std::size_t>(j)]) dirty[static_cast<std::size_t>(j)] = 2;
    }
    for (Index i = 0; i < n; ++i)
      if (dirty[static_cast<std::size_t>(i)]) {
        dirty[static_cast<std::size_t>(i)] = 0;
        if (active[i]) rate_of(i);
      }
  }
  return out;
}

double rate_span(const RateOrder& rates) {
  double hi = 0, lo = std::numeric_limits<double>::infinity();
  for (double r : rates.rate)
    if (r > 0) { hi = std::max(hi, r); lo = std::min(lo, r); }
  return hi > 0 && lo < hi ? hi / lo : 1.0;
}

Mat plain_propagator(const Mat& E, const Mat& F, double h) {
  check_input(E, F, h);
  Mat Es = E, Fs = F;
  row_equilibrate(Es, Fs);
  return balanced_expm(-solve_equilibrated(Es, Fs) * h);
}

Mat stiff_propagator(const Mat& E, const Mat& F, double h, ExponentialReport* report) {
  check_input(E, F, h);
  if (report) *report = ExponentialReport{};
  const Index n = E.rows();
  if (n == 0) return Mat(0, 0);
  // Equilibrate once, exactly (powers of two): rows of (E, F) scaled so each row of E has its
  // largest entry in [1, 2), then the diagonal similarity that balances |E^-1 F|.
  // Rates, cuts and Phi are invariant under both up to the similarity undone at the end.
  Mat Es = E, Fs = F;
  row_equilibrate(Es, Fs);
  Mat A = solve_equilibrated(Es, Fs);
  if (h == 0) return Mat::Identity(n, n);
  const Eigen::VectorXd d = balance_scaling(A);
  for (Index j = 0; j < n; ++j)
    for (Index i = 0; i < n; ++i) {
      const double f = d(j) / d(i);
      Es(i, j) *= f;
      Fs(i, j) *= f;
      A(i, j) *= f;  // exact (powers of two): E^-1 F of the scaled pair
    }

  const double span = rate_span(stiffness_rates(Es, Fs));
  Mat P;
  if (span < kCheapSpan) {
    if (report) {
      std::ostringstream m;
      m << "rate span " << span << " < " << kCheapSpan << ": one equilibrated expm\n";
      report->note = m.str();
    }
    // The scaled pair's E^-1 F is A already (an exact similarity): no second solve.
    A *= -h;
    P = balanced_expm(std::move(A));
  } else {
    Context ctx{report};
    {
      std::ostringstream m;
      m << "rate span " << span << ": multilevel block elimination";
      ctx.note(m.str());
    }
    P = propagate(Es, Fs, h, 0, ctx);
    if (report) {
      report->block_method = ctx.any_cut;
      report->levels = ctx.max_levels;
      report->newton_residual = static_cast<double>(ctx.worst_residual);
    }
  }
  for (Index i = 0; i < n; ++i)
    for (Index j = 0; j < n; ++j) P(i, j) *= d(i) / d(j);
  return P;
}

}  // namespace ringdown::solver
