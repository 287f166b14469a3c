// Index-1 reduction (see state_space.hpp for the method and its limits).
#include "solver/state_space.hpp"

#include <algorithm>
#include <cmath>
#include <numeric>

namespace ringdown::solver {

namespace {

// An algebraic block whose estimated reciprocal condition number (after
// equilibration) falls below this is treated as singular: at 1e-14 a solve
// keeps at most about two significant digits (Higham, Accuracy and Stability
// of Numerical Algorithms, 2002, ch. 7: relative error ~ cond x eps; from
// memory). A structurally index-2 block gives an exact or rounding-level zero
// pivot, far below it.
constexpr double kSingularRcond = 1e-14;

// The rows of C that must vanish for an algebraic coordinate: any entry above
// this fraction of max|C| means mna stamped something the partition does not
// expect (a capacitance we were not told about).
constexpr double kStructureSlack = 1e-12;

struct UnionFind {
  std::vector<int> parent;
  explicit UnionFind(int n) : parent(static_cast<std::size_t>(n)) {
    std::iota(parent.begin(), parent.end(), 0);
  }
  int find(int i) {
    while (parent[static_cast<std::size_t>(i)] != i) {
      int& p = parent[static_cast<std::size_t>(i)];
      p = parent[static_cast<std::size_t>(p)];
      i = p;
    }
    return i;
  }
  void join(int a, int b) { parent[static_cast<std::size_t>(find(a))] = find(b); }
};

double pow2_scale(double magnitude) {
  if (!(magnitude > 0) || !std::isfinite(magnitude)) return 1.0;
  return std::ldexp(1.0, -std::ilogb(magnitude));
}

// Inductor-only cuts (a node set whose cut holds only inductances, e.g. two
// inductors in series with nothing else at the joint) make G22 exactly
// singular: KCL over the set is a constraint K x_d = 0 on the inductance
// currents (formally index 2), and the set's voltage is fixed only by the
// derivative of that constraint. Index reduction by differentiating the
// constraint (Brenan, Campbell & Petzold, Numerical Solution of
// Initial-Value Problems in DAEs, 1989, ch. 2; from memory): with
// x_d' = C11^-1 (B1 u - G11 x_d - G12 x_a), K x_d' = 0 adds p equations
// K C11^-1 G12 x_a = K C11^-1 (B1 u - G11 x_d), which complete the rank of
// G22 x_a = B2 u - G21 x_d. The stacked system is solved by column-pivoted
// QR. K x_d is then conserved exactly (A has p zero eigenvalues there), so a
// consistent start stays consistent. A cut that carries a source (Y^T B2 != 0)
// would need u' and is left to the error path (mna rejects those anyway).
// Returns false when the kernel is not of this kind.
bool index_two_cut(const Eigen::MatrixXd& C11, const Eigen::MatrixXd& G11,
                   const Eigen::MatrixXd& G12, const Eigen::MatrixXd& G21,
                   const Eigen::MatrixXd& G22s, const Eigen::VectorXd& rs,
                   const Eigen::VectorXd& cs, const Eigen::MatrixXd& B1,
                   const Eigen::MatrixXd& B2, Eigen::MatrixXd& YG, Eigen::MatrixXd& YB) {
  const Eigen::Index a = G22s.rows(), r = G11.rows(), m = B1.cols();
  if (r == 0) return false;
  Eigen::FullPivLU<Eigen::MatrixXd> left(G22s.transpose());
  const Eigen::MatrixXd Ys = left.kernel();
  if (Ys.cols() == 0 || Ys.cwiseAbs().maxCoeff() == 0) return false;
  const Eigen::MatrixXd Y = rs.asDiagonal() * Ys;  // Y^T G22 = 0
  const Eigen::MatrixXd YB2 = Y.transpose() * B2;
  if (m > 0 && YB2.cwiseAbs().maxCoeff() >
                   kStructureSlack * (Y.cwiseAbs().transpose() * B2.cwiseAbs()).maxCoeff())
    return false;
  const Eigen::MatrixXd K = Y.transpose() * G21;  // p x r
  Eigen::VectorXd d(r);
  for (Eigen::Index i = 0; i < r; ++i) d(i) = 1.0 / std::sqrt(std::abs(C11(i, i)));
  Eigen::PartialPivLU<Eigen::MatrixXd> luc(d.asDiagonal() * C11 * d.asDiagonal());
  auto cinv = [&](const Eigen::MatrixXd& M) {
    return Eigen::MatrixXd(d.asDiagonal() * luc.solve(d.asDiagonal() * M));
  };
  const Eigen::Index p = K.rows();
  const Eigen::MatrixXd KC = K * cinv(Eigen::MatrixXd::Identity(r, r));
  Eigen::MatrixXd Ms(a + p, a), R(a + p, r + m);
  Ms.topRows(a) = rs.cwiseInverse().asDiagonal() * G22s * cs.cwiseInverse().asDiagonal();  // G22
  Ms.bottomRows(p) = KC * G12;
  // With x_a = -YG x_d + YB u (the index-1 convention): G22 YG = G21,
  // G22 YB = B2, and from the derived constraint KC G12 YG = KC G11,
  // KC G12 YB = KC B1.
  // The top block is consistent only on the constraint manifold: drop its
  // components along Y (the constraint itself), Pi = I - Y (Y^T Y)^-1 Y^T.
  const Eigen::MatrixXd YtY_inv_Yt = (Y.transpose() * Y).ldlt().solve(Y.transpose());
  R.topLeftCorner(a, r) = G21 - Y * (YtY_inv_Yt * G21);
  R.topRightCorner(a, m) = B2 - Y * (YtY_inv_Yt * B2);
  R.bottomLeftCorner(p, r) = KC * G11;
  R.bottomRightCorner(p, m) = KC * B1;
  Eigen::VectorXd row(a + p);
  for (Eigen::Index i = 0; i < a + p; ++i) {
    const double mx = Ms.row(i).cwiseAbs().maxCoeff();
    row(i) = mx > 0 ? 1.0 / mx : 1.0;
  }
  Eigen::ColPivHouseholderQR<Eigen::MatrixXd> qr(row.asDiagonal() * Ms * cs.asDiagonal());
  if (qr.rank() < a) return false;
  const Eigen::MatrixXd Ysol = cs.asDiagonal() * qr.solve(row.asDiagonal() * R);
  const Eigen::MatrixXd res = Ms * Ysol - R;
  if (!Ysol.allFinite() || res.cwiseAbs().maxCoeff() > 1e-9 * (R.cwiseAbs().maxCoeff() + 1e-300))
    return false;
  YG = Ysol.leftCols(r);
  YB = Ysol.rightCols(m);
  return true;
}

}  // namespace

void equilibrate(const Eigen::MatrixXd& M, Eigen::VectorXd& r, Eigen::VectorXd& c) {
  r.setOnes(M.rows());
  c.setOnes(M.cols());
  for (Eigen::Index i = 0; i < M.rows(); ++i) r(i) = pow2_scale(M.row(i).cwiseAbs().maxCoeff());
  for (Eigen::Index j = 0; j < M.cols(); ++j) {
    double m = 0;
    for (Eigen::Index i = 0; i < M.rows(); ++i) m = std::max(m, std::abs(r(i) * M(i, j)));
    c(j) = pow2_scale(m);
  }
}

StatePartition partition_states(const DifferentialStructure& structure, int unknowns,
                                const Eigen::MatrixXd& C) {
  const int n = unknowns;
  const int gnd = n;  // union-find slot of gnd
  const auto slot = [gnd](int u) { return u < 0 ? gnd : u; };
  std::vector<bool> touched(static_cast<std::size_t>(n), false);
  for (const auto& [a, b] : structure.capacitor_branches) {
    if (a >= 0) touched[static_cast<std::size_t>(a)] = true;
    if (b >= 0) touched[static_cast<std::size_t>(b)] = true;
  }
  // Spanning forest, largest capacitance first (Kruskal).
  std::vector<std::size_t> order(structure.capacitor_branches.size());
  std::iota(order.begin(), order.end(), std::size_t{0});
  if (structure.capacitances.size() == order.size())
    std::stable_sort(order.begin(), order.end(), [&](std::size_t x, std::size_t y) {
      return std::abs(structure.capacitances[x]) > std::abs(structure.capacitances[y]);
    });
  UnionFind uf(n + 1);
  std::vector<std::vector<int>> adjacent(static_cast<std::size_t>(n + 1));
  for (std::size_t i : order) {
    const auto [a, b] = structure.capacitor_branches[i];
    const int sa = slot(a), sb = slot(b);
    if (uf.find(sa) == uf.find(sb)) continue;
    uf.join(sa, sb);
    adjacent[static_cast<std::size_t>(sa)].push_back(sb);
    adjacent[static_cast<std::size_t>(sb)].push_back(sa);
  }
  std::vector<bool> inductor(static_cast<std::size_t>(n), false);
  for (int u : structure.inductor_unknowns) inductor[static_cast<std::size_t>(u)] = true;

  StatePartition p;
  p.unknowns = n;
  p.group_of.assign(static_cast<std::size_t>(n), -1);
  // Root of each component: gnd when it holds gnd, else the node with the
  // largest capacitance.
  std::vector<int> best(static_cast<std::size_t>(n + 1), -1);
  const int gnd_set = uf.find(gnd);
  for (int u = 0; u < n; ++u) {
    if (!touched[static_cast<std::size_t>(u)]) continue;
    const int set = uf.find(u);
    int& b = best[static_cast<std::size_t>(set)];
    if (set == gnd_set) b = gnd;
    else if (b < 0 || std::abs(C(u, u)) > std::abs(C(b, b))) b = u;
  }
  // Walk each tree from its root: one state per tree branch (child minus
  // parent), V1 column = the child's subtree.
  std::vector<int> parent(static_cast<std::size_t>(n + 1), -2);
  std::vector<int> state_of(static_cast<std::size_t>(n + 1), -1);  // branch into node
  std::vector<int> visit;
  std::vector<bool> done(static_cast<std::size_t>(n + 1), false);
  for (int u = 0; u <= n; ++u) {
    const int set = uf.find(u);
    const int root = best[static_cast<std::size_t>(set)];
    if (root < 0 || done[static_cast<std::size_t>(root)]) continue;
    visit.assign(1, root);
    done[static_cast<std::size_t>(root)] = true;
    parent[static_cast<std::size_t>(root)] = -1;
    for (std::size_t i = 0; i < visit.size(); ++i) {
      const int v = visit[i];
      for (int w : adjacent[static_cast<std::size_t>(v)]) {
        if (done[static_cast<std::size_t>(w)]) continue;
        done[static_cast<std::size_t>(w)] = true;
        parent[static_cast<std::size_t>(w)] = v;
        state_of[static_cast<std::size_t>(w)] = static_cast<int>(p.state_unknown.size());
        p.state_unknown.push_back(w);
        p.state_root.push_back(v == gnd ? -1 : v);
        p.state_nodes.emplace_back();
        visit.push_back(w);
      }
    }
  }
  // Subtree sets: every node joins the set of each branch on its path up.
  for (int u = 0; u < n; ++u) {
    for (int v = u; v >= 0 && v != gnd && parent[static_cast<std::size_t>(v)] != -1;
         v = parent[static_cast<std::size_t>(v)]) {
      const int k = state_of[static_cast<std::size_t>(v)];
      if (k < 0) break;
      p.state_nodes[static_cast<std::size_t>(k)].push_back(u);
    }
  }
  for (int u = 0; u < n; ++u) {
    if (!inductor[static_cast<std::size_t>(u)]) continue;
    p.state_unknown.push_back(u);
    p.state_root.push_back(-1);
    p.state_nodes.push_back({u});
  }
  // Algebraic groups: one per floating capacitor component, one per other unknown.
  std::vector<int> group_of_set(static_cast<std::size_t>(n + 1), -1);
  for (int u = 0; u < n; ++u) {
    const auto su = static_cast<std::size_t>(u);
    if (inductor[su]) continue;
    if (!touched[su]) {
      p.group_of[su] = static_cast<int>(p.algebraic_groups.size());
      p.algebraic_groups.push_back({u});
      continue;
    }
    const int set = uf.find(u);
    if (set == gnd_set) continue;
    int& g = group_of_set[static_cast<std::size_t>(set)];
    if (g < 0) {
      g = static_cast<int>(p.algebraic_groups.size());
      p.algebraic_groups.emplace_back();
    }
    p.algebraic_groups[static_cast<std::size_t>(g)].push_back(u);
    p.group_of[su] = g;
  }
  return p;
}

Eigen::VectorXd states_from_unknowns(const StatePartition& partition, const Eigen::VectorXd& x) {
  const auto r = static_cast<Eigen::Index>(partition.state_unknown.size());
  Eigen::VectorXd xd(r);
  for (Eigen::Index k = 0; k < r; ++k) {
    const int root = partition.state_root[static_cast<std::size_t>(k)];
    xd(k) = x(partition.state_unknown[static_cast<std::size_t>(k)]) - (root >= 0 ? x(root) : 0.0);
  }
  return xd;
}

ReductionResult reduce(const mna::Descriptor& descriptor, const StatePartition& partition) {
  ReductionResult out;
  const Eigen::MatrixXd& C = descriptor.C;
  const Eigen::MatrixXd& G = descriptor.G;
  const Eigen::MatrixXd& Bm = descriptor.B;
  const Eigen::Index n = partition.unknowns;
  const auto r = static_cast<Eigen::Index>(partition.state_unknown.size());
  const auto a = static_cast<Eigen::Index>(partition.algebraic_groups.size());
  const Eigen::Index m = Bm.cols();
  if (C.rows() != n || G.rows() != n || Bm.rows() != n || r + a != n) {
    out.message = "internal: descriptor and state partition sizes disagree";
    return out;
  }
  const auto& sel = partition.state_unknown;
  const auto& groups = partition.algebraic_groups;

  // Algebraic rows of C must vanish (the partition's premise).
  const double cmax = C.cwiseAbs().maxCoeff();
  for (Eigen::Index g = 0; g < a; ++g) {
    Eigen::RowVectorXd row = Eigen::RowVectorXd::Zero(n);
    for (int u : groups[static_cast<std::size_t>(g)]) row += C.row(u);
    if (row.cwiseAbs().maxCoeff() > kStructureSlack * cmax) {
      out.message = "internal: a capacitance or inductance is missing from the structure";
      out.unknowns = groups[static_cast<std::size_t>(g)];
      return out;
    }
  }

  // Blocks of V^T G V, V^T B, V^T C V (V = [V1 V2] of 0/1 entries: sums of
  // stamped values, no other arithmetic).
  const auto& nodes = partition.state_nodes;
  auto right = [&](const Eigen::MatrixXd& M, Eigen::MatrixXd& MV1, Eigen::MatrixXd& MV2) {
    MV1 = Eigen::MatrixXd::Zero(n, r);
    MV2 = Eigen::MatrixXd::Zero(n, a);
    for (Eigen::Index k = 0; k < r; ++k)
      for (int u : nodes[static_cast<std::size_t>(k)]) MV1.col(k) += M.col(u);
    for (Eigen::Index g = 0; g < a; ++g)
      for (int u : groups[static_cast<std::size_t>(g)]) MV2.col(g) += M.col(u);
  };
  auto left1 = [&](const Eigen::MatrixXd& M) {  // V1^T M
    Eigen::MatrixXd out = Eigen::MatrixXd::Zero(r, M.cols());
    for (Eigen::Index k = 0; k < r; ++k)
      for (int u : nodes[static_cast<std::size_t>(k)]) out.row(k) += M.row(u);
    return out;
  };
  auto left2 = [&](const Eigen::MatrixXd& M) {  // V2^T M
    Eigen::MatrixXd out = Eigen::MatrixXd::Zero(a, M.cols());
    for (Eigen::Index g = 0; g < a; ++g)
      for (int u : groups[static_cast<std::size_t>(g)]) out.row(g) += M.row(u);
    return out;
  };
  Eigen::MatrixXd GV1, GV2, CV1, CV2;
  right(G, GV1, GV2);
  right(C, CV1, CV2);
  const Eigen::MatrixXd G11 = left1(GV1), G12 = left1(GV2), G21 = left2(GV1), G22 = left2(GV2);
  const Eigen::MatrixXd C11 = left1(CV1), B1 = left1(Bm), B2 = left2(Bm);

  // Eliminate the algebraic coordinates: Y = G22^-1 [G21 B2], equilibrated.
  Eigen::MatrixXd YG(a, r), YB(a, m);
  if (a > 0) {
    Eigen::VectorXd rs, cs;
    equilibrate(G22, rs, cs);
    const Eigen::MatrixXd G22s = rs.asDiagonal() * G22 * cs.asDiagonal();
    Eigen::PartialPivLU<Eigen::MatrixXd> lu(G22s);
    double rcond = lu.rcond();
    Eigen::MatrixXd rhs(a, r + m);
    rhs << G21, B2;
    Eigen::MatrixXd Y;
    if (rcond > kSingularRcond) {
      // The rcond estimate can miss an exactly zero pivot: check the solve.
      const Eigen::MatrixXd rhs_s = rs.asDiagonal() * rhs;
      const Eigen::MatrixXd Z = lu.solve(rhs_s);
      const double scale = (G22s.cwiseAbs() * Z.cwiseAbs()).maxCoeff() + rhs_s.cwiseAbs().maxCoeff();
      if (Z.allFinite() && (G22s * Z - rhs_s).cwiseAbs().maxCoeff() <= 1e-10 * (scale + 1e-300))
        Y = cs.asDiagonal() * Z;
      else
        rcond = 0;
    }
    out.condition = rcond > 0 ? 1.0 / rcond : INFINITY;
    if (!(rcond > kSingularRcond)) {
      if (index_two_cut(C11, G11, G12, G21, G22s, rs, cs, B1, B2, YG, YB)) {
        out.condition = 0;
      } else {
        // Name the coordinates in the (numerical) kernel.
        Eigen::FullPivLU<Eigen::MatrixXd> full(G22s);
        const Eigen::MatrixXd ker = full.kernel();
        Eigen::VectorXd v = ker.cols() > 0 ? Eigen::VectorXd(ker.col(0)) : Eigen::VectorXd();
        if (v.size() == 0 || v.cwiseAbs().maxCoeff() == 0) {
          // Nearly singular, not exactly: use the smallest singular vector.
          Eigen::JacobiSVD<Eigen::MatrixXd> svd(G22s, Eigen::ComputeFullV);
          v = svd.matrixV().col(a - 1);
        }
        const double vmax = v.cwiseAbs().maxCoeff();
        for (Eigen::Index g = 0; g < a; ++g)
          if (std::abs(v(g)) > 1e-6 * vmax)
            for (int u : groups[static_cast<std::size_t>(g)]) out.unknowns.push_back(u);
        out.message = "the algebraic part of the network equations is singular";
        return out;
      }
    } else {
    YG = Y.leftCols(r);
    YB = Y.rightCols(m);
    }
  }

  StateSpace& s = out.system;
  s.C11 = C11;
  s.Gs = G11;
  s.Bs = B1;
  if (a > 0) {
    s.Gs.noalias() -= G12 * YG;
    s.Bs.noalias() -= G12 * YB;
  }
  // A = -C11^-1 Gs, B = C11^-1 Bs with C11 scaled to a unit diagonal.
  if (r > 0) {
    Eigen::VectorXd d(r);
    for (Eigen::Index i = 0; i < r; ++i) {
      const double c = std::abs(C11(i, i));
      if (!(c > 0)) {
        out.message = "internal: a state without capacitance or inductance";
        out.unknowns = {sel[static_cast<std::size_t>(i)]};
        return out;
      }
      d(i) = 1.0 / std::sqrt(c);
    }
    // Diagonal C11 (no mutual inductance, a capacitor forest whose reduced matrix came out
    // diagonal: the common case): A and B are row scalings, O(r^2), where the LU below
    // costs O(r^3) (the whole set-up of a 1000-state ladder).
    bool diagonal = true;
    for (Eigen::Index j = 0; j < r && diagonal; ++j)
      for (Eigen::Index i = 0; i < r && diagonal; ++i)
        diagonal = i == j || C11(i, j) == 0.0;
    if (diagonal) {
      const Eigen::VectorXd inv = C11.diagonal().cwiseInverse();
      s.A = -(inv.asDiagonal() * s.Gs);
      s.B = inv.asDiagonal() * s.Bs;
    } else {
      const Eigen::MatrixXd Cs = d.asDiagonal() * C11 * d.asDiagonal();
      Eigen::PartialPivLU<Eigen::MatrixXd> luc(Cs);
      if (!(luc.rcond() > kSingularRcond)) {
        out.message =
            "the capacitance/inductance matrix is singular (coupling factors too close to 1?)";
        out.unknowns = sel;
        out.condition = 1.0 / luc.rcond();
        return out;
      }
      s.A = -(d.asDiagonal() * luc.solve(d.asDiagonal() * s.Gs));
      s.B = d.asDiagonal() * luc.solve(d.asDiagonal() * s.Bs);
    }
  } else {
    s.A.resize(0, 0);
    s.B.resize(0, m);
  }
  s.T = Eigen::MatrixXd::Zero(n, r);
  s.D = Eigen::MatrixXd::Zero(n, m);
  for (Eigen::Index k = 0; k < r; ++k)
    for (int u : nodes[static_cast<std::size_t>(k)]) s.T(u, k) = 1.0;
  for (Eigen::Index g = 0; g < a; ++g) {
    for (int u : groups[static_cast<std::size_t>(g)]) {
      s.T.row(u) -= YG.row(g);
      s.D.row(u) = YB.row(g);
    }
  }
  if (!s.A.allFinite() || !s.B.allFinite() || !s.T.allFinite() || !s.D.allFinite()) {
    out.message = "the reduced state-space matrices are not finite";
    return out;
  }
  out.ok = true;
  return out;
}

StateElements state_elements(const Circuit& circuit, const mna::Network& network) {
  StateElements out;
  for (std::size_t e = 0; e < circuit.elements.size(); ++e) {
    const Element& el = circuit.elements[e];
    if (el.kind == ElementKind::Capacitor && el.value != 0) {
      out.structure.capacitor_branches.emplace_back(network.node_unknown(el.a),
                                                    network.node_unknown(el.b));
      out.structure.capacitances.push_back(el.value);
      out.capacitor_elements.push_back(static_cast<int>(e));
    } else if (el.kind == ElementKind::Inductor) {
      out.structure.inductor_unknowns.push_back(network.branch_unknown(static_cast<int>(e)));
      out.inductor_elements.push_back(static_cast<int>(e));
    }
  }
  return out;
}

}  // namespace ringdown::solver
