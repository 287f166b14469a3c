// Natural modes (see modes.hpp for what this does and does not do).
//
// Method, per switch configuration:
//   1. A from the index-1 reduction (partition_states + reduce), the same
//      state coordinates the transient engine uses: capacitor-forest branch
//      voltages and inductance currents.
//   2. Balancing (Parlett & Reinsch, "Balancing a matrix for calculation of
//      eigenvalues and eigenvectors", Numer. Math. 13, 1969): A_b = D^-1 A D
//      with D a diagonal of powers of two, so the scaling itself is exact.
//      Eigen 3.4's EigenSolver does not balance (its Eigenvalues module has
//      no balancing step; only the unsupported companion-matrix solver
//      does), and a circuit's A mixes 1/(RC) and 1/L entries many decades
//      apart, which balancing brings to one scale before the QR iteration.
//   3. Eigenvalues and right eigenvectors V_b of A_b by Eigen::EigenSolver;
//      left eigenvectors as the rows of W_b = V_b^-1.
//   4. Participation factors p_ki = |v_ki w_ik| (Perez-Arriaga, Verghese &
//      Schweppe, "Selective modal analysis with applications to electric
//      power systems, Part I", IEEE Trans. PAS-101, 1982), normalised to sum
//      1 per mode. Their v_ki w_ik are complex and sum to 1 exactly (W V = I);
//      the magnitudes are what the paper tabulates, hence the normalisation.
//      They are invariant under the diagonal similarity of step 2
//      (v = D v_b, w = w_b D^-1, so v_ki w_ik = v_b,ki w_b,ik), which is why
//      they are taken from the balanced matrix directly.
//   5. States to parts: an inductance current belongs to its inductor
//      element; a capacitor-forest branch voltage to the capacitor(s) on that
//      branch (parallel capacitors split the state's share in proportion to
//      their capacitance, which is how the mode's stored energy divides
//      between them); elements to the part the user wrote (C1.esl counts for
//      C1). A capacitor that closes a loop of capacitors has no state of its
//      own and gets no share.
#include "solver/modes.hpp"

#include <Eigen/Eigenvalues>
#include <algorithm>
#include <cmath>
#include <limits>
#include <map>
#include <numbers>
#include <optional>

#include "mna/descriptor.hpp"
#include "solver/state_space.hpp"

namespace ringdown::solver {

namespace {

// Radix of the balancing scale factors: powers of two keep D^-1 A D exact
// (Parlett & Reinsch 1969, as in LAPACK xGEBAL).
constexpr double kBalanceRadix = 2.0;
// A balancing sweep that reduces a row+column norm by less than this factor
// stops changing it (Parlett & Reinsch 1969 use 0.95).
constexpr double kBalanceGain = 0.95;
// Sweeps at most (each halves or doubles a scale at least once when it acts;
// 100 bounds the work on any matrix; common practice, no source).
constexpr int kBalanceSweeps = 100;
// A pole with |lambda| below this many ulps of ||A|| is a zero pole: a
// backward-stable eigensolver finds eigenvalues only to about eps ||A||
// (Golub & Van Loan, Matrix Computations, 4th ed., 2013, sec. 7.1; from
// memory), so a smaller one cannot be told from zero.
constexpr double kZeroPoleUlps = 64.0;
// V is treated as singular below this reciprocal condition estimate: a solve
// with it keeps at most about two digits (Higham, Accuracy and Stability of
// Numerical Algorithms, 2002, ch. 7: relative error ~ cond x eps; from memory;
// the same bound state_space.cpp uses).
constexpr double kInvertibleRcond = 1e-14;
// Instants closer than this many ulps of the run's length are one switching
// event (gates crossing together), as the transient engine merges them.
constexpr double kSameInstantUlps = 64.0;

std::string state_suffix(ElementKind kind) {
  return kind == ElementKind::Capacitor ? ".vc" : ".il";
}

}  // namespace

Eigen::VectorXd balance(Eigen::MatrixXd& A) {
  const Eigen::Index n = A.rows();
  Eigen::VectorXd d = Eigen::VectorXd::Ones(n);
  const double radix2 = kBalanceRadix * kBalanceRadix;
  for (int sweep = 0; sweep < kBalanceSweeps; ++sweep) {
    bool done = true;
    for (Eigen::Index i = 0; i < n; ++i) {
      // Off-diagonal column and row norms (1-norms, as in the paper's
      // suggested variant).
      double c = A.col(i).cwiseAbs().sum() - std::abs(A(i, i));
      double r = A.row(i).cwiseAbs().sum() - std::abs(A(i, i));
      if (!(c > 0) || !(r > 0) || !std::isfinite(c) || !std::isfinite(r)) continue;
      const double s = c + r;
      double f = 1;
      double g = r / kBalanceRadix;
      while (c < g) {
        f *= kBalanceRadix;
        c *= radix2;
      }
      g = r * kBalanceRadix;
      while (c > g) {
        f /= kBalanceRadix;
        c /= radix2;
      }
      if ((c + r) / f < kBalanceGain * s) {
        done = false;
        A.row(i) /= f;
        A.col(i) *= f;
        d(i) *= f;
      }
    }
    if (done) break;
  }
  return d;
}

MatrixModes modes_of_matrix(const Eigen::MatrixXd& A_in) {
  MatrixModes out;
  const Eigen::Index r = A_in.rows();
  if (r == 0) {
    out.ok = true;
    return out;
  }
  if (!A_in.allFinite()) return out;
  Eigen::MatrixXd A = A_in;
  balance(A);
  Eigen::EigenSolver<Eigen::MatrixXd> es(A, true);
  if (es.info() != Eigen::Success) return out;
  const Eigen::VectorXcd lambda = es.eigenvalues();
  const Eigen::MatrixXcd V = es.eigenvectors();
  // Left eigenvectors: the rows of V^-1 while V is invertible. At a defective
  // eigenvalue (critical damping: a double pole with one eigenvector) V is
  // singular to rounding; the left eigenvectors are then taken from A^T
  // directly (A^T w = lambda w), matched by nearest eigenvalue. Only their
  // direction matters, since the factors are normalised per mode.
  Eigen::PartialPivLU<Eigen::MatrixXcd> lu(V);
  const double rcond = lu.rcond();
  Eigen::MatrixXcd W;  // row i: left eigenvector of mode i
  if (rcond > kInvertibleRcond) W = lu.inverse();
  if (W.size() > 0 && W.allFinite()) {
    out.eigenvector_condition = 1.0 / rcond;
  } else {
    Eigen::EigenSolver<Eigen::MatrixXd> left(A.transpose(), true);
    if (left.info() != Eigen::Success) return out;
    const Eigen::VectorXcd mu = left.eigenvalues();
    W.resize(r, r);
    for (Eigen::Index i = 0; i < r; ++i) {
      Eigen::Index best = 0;
      for (Eigen::Index j = 1; j < r; ++j)
        if (std::abs(mu(j) - lambda(i)) < std::abs(mu(best) - lambda(i))) best = j;
      W.row(i) = left.eigenvectors().col(best).transpose();
    }
    out.eigenvector_condition = std::numeric_limits<double>::infinity();
  }
  const double norm = A_in.cwiseAbs().colwise().sum().maxCoeff();
  const double zero = kZeroPoleUlps * std::numeric_limits<double>::epsilon() * norm;
  constexpr double two_pi = 2 * std::numbers::pi;

  for (Eigen::Index i = 0; i < r; ++i) {
    const std::complex<double> lam = lambda(i);
    if (lam.imag() < 0) continue;  // the conjugate of a listed pair
    Mode m;
    m.pole = lam;
    const double mag = std::abs(lam);
    if (mag <= zero) {
      m.kind = ModeKind::Constant;
      m.pole = 0;
      m.time_constant = std::numeric_limits<double>::infinity();
    } else {
      m.kind = lam.imag() > 0 ? ModeKind::Oscillating : ModeKind::Real;
      m.damped_hz = lam.imag() / two_pi;
      m.natural_hz = mag / two_pi;
      m.damping_ratio = -lam.real() / mag;
      m.growing = lam.real() > 0;
      m.time_constant =
          lam.real() != 0 ? -1.0 / lam.real() : std::numeric_limits<double>::infinity();
      if (m.kind == ModeKind::Oscillating)
        m.q = m.damping_ratio != 0 ? 1.0 / (2.0 * m.damping_ratio)
                                   : std::numeric_limits<double>::infinity();
    }
    m.state_participation.resize(static_cast<std::size_t>(r));
    double sum = 0;
    for (Eigen::Index k = 0; k < r; ++k) {
      const double p = std::abs(V(k, i) * W(i, k));
      m.state_participation[static_cast<std::size_t>(k)] = p;
      sum += p;
    }
    for (double& p : m.state_participation) p = sum > 0 ? p / sum : 1.0 / static_cast<double>(r);
    out.modes.push_back(std::move(m));
  }
  // By damped frequency; real and zero poles (frequency 0) first, slowest first.
  std::stable_sort(out.modes.begin(), out.modes.end(), [](const Mode& a, const Mode& b) {
    if (a.damped_hz != b.damped_hz) return a.damped_hz < b.damped_hz;
    return a.natural_hz < b.natural_hz;
  });
  out.ok = true;
  return out;
}

ModesResult compute_modes(const Circuit& circuit, const ModesOptions& options,
                          Diagnostics& diagnostics) {
  ModesResult out;
  static const SourcePosition nowhere;
  const SourcePosition& where = circuit.transient ? circuit.transient->where : nowhere;
  std::optional<mna::Network> analysed =
      mna::Network::analyse(circuit, options.strict, diagnostics);
  if (!analysed) return out;
  const mna::Network& net = *analysed;

  // The same states as the transient engine.
  StateElements states = state_elements(circuit, net);
  const DifferentialStructure& structure = states.structure;
  const std::vector<int>& cap_element = states.capacitor_elements;  // per capacitor branch
  std::map<int, int> inductor_of;  // branch unknown -> element
  for (std::size_t k = 0; k < structure.inductor_unknowns.size(); ++k)
    inductor_of[structure.inductor_unknowns[k]] = states.inductor_elements[k];

  // Switch configurations in the order the run meets them.
  const std::vector<int>& switch_elements = net.switches();
  std::vector<std::string> switch_names;
  for (int e : switch_elements) {
    const Element& el = circuit.elements[static_cast<std::size_t>(e)];
    switch_names.push_back(el.part >= 0 ? circuit.parts[static_cast<std::size_t>(el.part)].name
                                        : el.name);
  }
  std::vector<std::pair<double, mna::SwitchState>> met;
  mna::SwitchState state = net.initial_switches();
  met.emplace_back(0.0, state);
  if (circuit.transient && !switch_elements.empty()) {
    const double until = circuit.transient->until;
    struct Crossing {
      double t;
      std::size_t k;
      bool closed;
    };
    std::vector<Crossing> crossings;
    for (std::size_t k = 0; k < switch_elements.size(); ++k) {
      const WaveformPtr& gate =
          circuit.elements[static_cast<std::size_t>(switch_elements[k])].waveform;
      if (!gate) continue;
      // A gate whose value at 0 differs from just before 0 switches at 0
      // (NETLIST.md section 5: before t = 0 it holds its value from the left).
      const bool at_zero = gate->value(0.0) > 0.5;
      if (at_zero != state[k]) crossings.push_back({0.0, k, at_zero});
      for (const auto& [t, dir] : gate->crossings(0.5, until)) crossings.push_back({t, k, dir > 0});
    }
    std::stable_sort(crossings.begin(), crossings.end(),
                     [](const Crossing& a, const Crossing& b) { return a.t < b.t; });
    const double instant = kSameInstantUlps * std::numeric_limits<double>::epsilon() * until;
    for (std::size_t i = 0; i < crossings.size();) {
      const double t0 = crossings[i].t;
      mna::SwitchState next = state;
      for (; i < crossings.size() && crossings[i].t - t0 <= instant; ++i)
        next[crossings[i].k] = crossings[i].closed;
      if (next == state) continue;
      state = next;
      // At t = 0 the new configuration replaces the one before 0.
      if (t0 <= instant && met.size() == 1)
        met.front().second = state;
      else
        met.emplace_back(t0, state);
    }
  }

  std::map<mna::SwitchState, bool> seen;
  std::optional<StatePartition> partition;
  std::vector<std::vector<std::pair<int, double>>> state_elements;  // state -> (element, weight)
  for (const auto& [from, closed] : met) {
    if (seen[closed]) continue;
    seen[closed] = true;
    const mna::Descriptor descriptor = net.stamp(circuit, closed);
    if (!partition) {
      partition = partition_states(structure, net.unknowns(), descriptor.C);
      // Which elements each state belongs to.
      const std::size_t r = partition->state_unknown.size();
      state_elements.resize(r);
      for (std::size_t k = 0; k < r; ++k) {
        const int u = partition->state_unknown[k];
        const int root = partition->state_root[k];
        if (auto it = inductor_of.find(u); it != inductor_of.end() && root < 0) {
          state_elements[k].emplace_back(it->second, 1.0);
          out.state_names.push_back(circuit.elements[static_cast<std::size_t>(it->second)].name +
                                    ".il");
          continue;
        }
        double total = 0;
        for (std::size_t b = 0; b < structure.capacitor_branches.size(); ++b) {
          const auto [a, c] = structure.capacitor_branches[b];
          if ((a == u && c == root) || (a == root && c == u)) {
            state_elements[k].emplace_back(cap_element[b], std::abs(structure.capacitances[b]));
            total += std::abs(structure.capacitances[b]);
          }
        }
        for (auto& [e, w] : state_elements[k]) w = total > 0 ? w / total : 0;
        std::string name;
        for (const auto& [e, w] : state_elements[k])
          name += (name.empty() ? "" : "|") + circuit.elements[static_cast<std::size_t>(e)].name +
                  state_suffix(ElementKind::Capacitor);
        out.state_names.push_back(name.empty() ? net.unknown_names()[static_cast<std::size_t>(u)]
                                               : name);
      }
    }
    ReductionResult red = reduce(descriptor, *partition);
    if (!red.ok) {
      std::string msg = "modes: " + red.message;
      if (!red.unknowns.empty()) {
        msg += " (unknowns";
        for (std::size_t i = 0; i < red.unknowns.size(); ++i)
          msg += (i ? ", " : " ") + net.unknown_names()[static_cast<std::size_t>(red.unknowns[i])];
        msg += ")";
      }
      diagnostics.push_back(Diagnostic{Severity::Error, where, msg,
                                       "a node reached only through inductors needs a resistor "
                                       "to the rest of the network (rpar= on an inductor)"});
      return out;
    }
    MatrixModes mm = modes_of_matrix(red.system.A);
    if (!mm.ok) {
      diagnostics.push_back(Diagnostic{Severity::Error, where,
                                       "modes: the eigenvalue iteration did not converge for the "
                                       "state matrix of this switch configuration",
                                       "check for element values many decades apart"});
      out.numerical_failure = true;
      return out;
    }
    ConfigurationModes cm;
    cm.from = from;
    cm.closed = closed;
    cm.switch_names = switch_names;
    cm.eigenvector_condition = mm.eigenvector_condition;
    for (Mode& m : mm.modes) {
      // Keyed by part; an element without a part (hand-built circuits)
      // stands for itself under the key -2 - element.
      std::map<int, double> share;
      for (std::size_t k = 0; k < m.state_participation.size(); ++k)
        for (const auto& [e, w] : state_elements[k]) {
          const int part = circuit.elements[static_cast<std::size_t>(e)].part;
          share[part >= 0 ? part : -2 - e] += w * m.state_participation[k];
        }
      for (const auto& [key, s] : share) {
        Participation p;
        p.part = key >= 0 ? key : -1;
        p.name = key >= 0 ? circuit.parts[static_cast<std::size_t>(key)].name
                          : circuit.elements[static_cast<std::size_t>(-2 - key)].name;
        p.share = s;
        m.parts.push_back(std::move(p));
      }
      std::stable_sort(
          m.parts.begin(), m.parts.end(),
          [](const Participation& a, const Participation& b) { return a.share > b.share; });
      cm.modes.push_back(std::move(m));
    }
    out.configurations.push_back(std::move(cm));
  }
  out.ok = true;
  return out;
}

}  // namespace ringdown::solver
