// DC operating point and zero state with holds (see initial_state.hpp).
#include "solver/initial_state.hpp"

#include <cmath>
#include <numeric>

namespace ringdown::solver {

namespace {

// Same reading of "singular" as the reduction (state_space.cpp): reciprocal
// condition below 1e-14 after equilibration (Higham 2002, ch. 7; from memory).
constexpr double kSingularRcond = 1e-14;
// Rank threshold of the least-energy fallback, relative to the largest
// pivot of the complete orthogonal decomposition (common practice, no source:
// a few hundred ulps times the size).
constexpr double kRankThreshold = 1e-12;
// Residual above this fraction of the right-hand side's size: inconsistent.
constexpr double kInconsistency = 1e-9;
// Two held voltages differing by more than this fraction of the larger
// contradict each other (zero state; common practice, no source).
constexpr double kHoldSlack = 1e-12;

}  // namespace

DcSolution solve_dc(const DcProblem& p) {
  DcSolution out;
  const Eigen::Index n = p.G.rows();
  const auto k = static_cast<Eigen::Index>(p.capacitors.size());
  const Eigen::Index N = n + k;
  Eigen::MatrixXd K = Eigen::MatrixXd::Zero(N, N);
  Eigen::VectorXd rhs = Eigen::VectorXd::Zero(N);
  K.topLeftCorner(n, n) = p.G;
  rhs.head(n) = p.rhs;
  for (const auto& h : p.inductors) {
    K.row(h.unknown).setZero();
    K(h.unknown, h.unknown) = 1.0;
    rhs(h.unknown) = h.i0;
  }
  for (Eigen::Index c = 0; c < k; ++c) {
    const auto& h = p.capacitors[static_cast<std::size_t>(c)];
    const Eigen::Index row = n + c;
    if (h.a >= 0) {
      K(row, h.a) += 1.0;
      K(h.a, row) += 1.0;
    }
    if (h.b >= 0) {
      K(row, h.b) -= 1.0;
      K(h.b, row) -= 1.0;
    }
    rhs(row) = h.v0;
  }
  Eigen::VectorXd rs, cs;
  equilibrate(K, rs, cs);
  const Eigen::MatrixXd Ks = rs.asDiagonal() * K * cs.asDiagonal();
  const Eigen::VectorXd bs = rs.asDiagonal() * rhs;
  Eigen::PartialPivLU<Eigen::MatrixXd> lu(Ks);
  const double rcond = N > 0 ? lu.rcond() : 1.0;
  out.condition = rcond > 0 ? 1.0 / rcond : INFINITY;
  Eigen::VectorXd x;
  bool solved = false;
  if (rcond > kSingularRcond) {
    // The rcond estimate can miss an exactly zero pivot: check the answer.
    const Eigen::VectorXd y = lu.solve(bs);
    solved = y.allFinite() &&
             (Ks * y - bs).cwiseAbs().maxCoeff() <= kInconsistency * (bs.cwiseAbs().maxCoeff() + 1e-300);
    if (solved) x = cs.asDiagonal() * y;
  }
  if (!solved) {
    // Least stored energy: x = W y with W = diag(1/sqrt(weight)) on the
    // energy-storing unknowns, minimum ||y||.
    Eigen::VectorXd w = cs;
    for (Eigen::Index i = 0; i < n; ++i)
      if (p.weights(i) > 0) w(i) = 1.0 / std::sqrt(p.weights(i));
    Eigen::VectorXd r2 = rs;
    const Eigen::MatrixXd Kw = K * w.asDiagonal();
    for (Eigen::Index i = 0; i < N; ++i) {
      const double m = Kw.row(i).cwiseAbs().maxCoeff();
      r2(i) = m > 0 ? 1.0 / m : 1.0;
    }
    Eigen::CompleteOrthogonalDecomposition<Eigen::MatrixXd> cod;
    cod.setThreshold(kRankThreshold);
    cod.compute(r2.asDiagonal() * Kw);
    const Eigen::VectorXd b2 = r2.asDiagonal() * rhs;
    const Eigen::VectorXd y = cod.solve(b2);
    x = w.asDiagonal() * y;
    const Eigen::VectorXd res = b2 - (r2.asDiagonal() * Kw) * y;
    const double scale = b2.cwiseAbs().maxCoeff() + 1e-300;
    if (res.cwiseAbs().maxCoeff() > kInconsistency * scale) {
      const double rmax = res.cwiseAbs().maxCoeff();
      for (Eigen::Index i = 0; i < N; ++i)
        if (std::abs(res(i)) > 1e-3 * rmax) out.rows.push_back(static_cast<int>(i));
      return out;
    }
    out.singular = true;
  }
  if (!x.allFinite()) return out;
  out.x = x.head(n);
  out.ok = true;
  return out;
}

bool zero_state(const StatePartition& partition,
                const std::vector<std::pair<int, int>>& capacitor_branches,
                const std::vector<CapacitorHold>& capacitors,
                const std::vector<InductorHold>& inductors, Eigen::VectorXd& xd,
                std::vector<int>& conflict) {
  const int n = partition.unknowns;
  const auto r = static_cast<Eigen::Index>(partition.state_unknown.size());
  xd = Eigen::VectorXd::Zero(r);
  // Potentials by union-find with offsets: p[u] = p[find(u)] + off[u].
  const int gnd = n;
  std::vector<int> parent(static_cast<std::size_t>(n + 1));
  std::iota(parent.begin(), parent.end(), 0);
  std::vector<double> off(static_cast<std::size_t>(n + 1), 0.0);
  std::vector<std::vector<int>> holders(static_cast<std::size_t>(n + 1));  // held caps per set
  std::vector<int> path;
  auto find = [&](int u) {
    path.clear();
    while (parent[static_cast<std::size_t>(u)] != u) {
      path.push_back(u);
      u = parent[static_cast<std::size_t>(u)];
    }
    for (auto it = path.rbegin(); it != path.rend(); ++it) {
      const auto v = static_cast<std::size_t>(*it);
      const auto pv = static_cast<std::size_t>(parent[v]);
      if (static_cast<int>(pv) != u) off[v] += off[pv];
      parent[v] = u;
    }
    return u;
  };
  // Impose p[a] - p[b] = v (hard) or, if still free, p[a] = p[b] (soft).
  auto join = [&](int a, int b, double v, int element, bool hard) {
    const int ia = a < 0 ? gnd : a;
    const int ib = b < 0 ? gnd : b;
    const int ra = find(ia), rb = find(ib);
    const auto sa = static_cast<std::size_t>(ia), sb = static_cast<std::size_t>(ib);
    if (ra == rb) {
      if (!hard) return true;
      const double have = off[sa] - off[sb];
      if (std::abs(have - v) > kHoldSlack * std::max(std::abs(have), std::abs(v))) {
        // Name the earlier hold that fixed this difference (a parallel one
        // first) and this one.
        int other = -1;
        for (int e : holders[static_cast<std::size_t>(ra)]) other = e;
        for (const auto& h : capacitors)
          if (h.element != element &&
              ((h.a == a && h.b == b) || (h.a == b && h.b == a)))
            other = h.element;
        conflict = {other, element};
        return false;
      }
      return true;
    }
    // Attach ra under rb: off[ra] = v - off[a] + off[b].
    off[static_cast<std::size_t>(ra)] = v - off[sa] + off[sb];
    parent[static_cast<std::size_t>(ra)] = rb;
    auto& hb = holders[static_cast<std::size_t>(rb)];
    auto& ha = holders[static_cast<std::size_t>(ra)];
    hb.insert(hb.end(), ha.begin(), ha.end());
    if (hard) hb.push_back(element);
    return true;
  };
  for (const auto& h : capacitors)
    if (!join(h.a, h.b, h.v0, h.element, true)) return false;
  // Unheld capacitances start at zero wherever the holds leave them free.
  for (const auto& [a, b] : capacitor_branches) join(a, b, 0.0, -1, false);
  auto potential = [&](int u) {
    const int iu = u < 0 ? gnd : u;
    const int ru = find(iu);
    const double pu = off[static_cast<std::size_t>(iu)];
    const int rg = find(gnd);
    return ru == rg ? pu - off[static_cast<std::size_t>(gnd)] : pu;
  };
  for (Eigen::Index s = 0; s < r; ++s) {
    const int u = partition.state_unknown[static_cast<std::size_t>(s)];
    if (partition.group_of[static_cast<std::size_t>(u)] < 0 && partition.state_root[static_cast<std::size_t>(s)] < 0) {
      // gnd component node or inductance current: absolute.
      bool is_inductor = false;
      for (const auto& h : inductors) is_inductor = is_inductor || h.unknown == u;
      xd(s) = is_inductor ? 0.0 : potential(u);
    } else {
      xd(s) = potential(u) - potential(partition.state_root[static_cast<std::size_t>(s)]);
    }
  }
  for (const auto& h : inductors) {
    for (Eigen::Index s = 0; s < r; ++s)
      if (partition.state_unknown[static_cast<std::size_t>(s)] == h.unknown) xd(s) = h.i0;
  }
  return true;
}

}  // namespace ringdown::solver
