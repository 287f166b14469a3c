// mna::Network: the descriptor system C x' + G x = B u(t) of a flat Circuit
// by modified nodal analysis (Ho, Ruehli & Brennan, "The modified nodal
// approach to network analysis", IEEE Trans. Circuits Syst. 22, 1975; from
// memory), and the linear output maps of every recordable signal.
//
// analyse() does all the structural work once: topology checks
// (topology.cpp), the unknown layout, input columns, the switch list, the
// hidden 1 GOhm ties of floating subnetworks, and the null space of C, which
// follows from the structure alone. stamp() then only writes values, so sweeps
// and trials restamp changed element values cheaply; it does not re-check
// topology.
//
// Sign conventions (all rows are "sum = input", C x' + G x = B u):
//  - KCL row of node v: the sum of the currents LEAVING v through its
//    branches. A branch current i of element a->b (passive convention: from
//    a through the element to b) adds +i to row a and -i to row b.
//  - Inductor branch row:   L di/dt + sum_j M_j di_j/dt - (v_a - v_b) = 0.
//    So C holds +L and +M on the branch rows, G holds -1 / +1 at the node
//    columns, and C stays symmetric positive semi-definite.
//  - Voltage source row:    v_a - v_b = u.
//  - vcvs row:              v_a - v_b - gain (v_cp - v_cn) = 0.
//  - ccvs row:              v_a - v_b - gain i_through = 0.
//  - current source: u flows a -> b, i.e. leaves a: B(a) = -1, B(b) = +1.
//  - vccs / cccs: their current gain*v_ctrl or gain*i_through leaves a.
//  - couple: M = k sqrt(La Lb) for every pair, the first node (a) of each
//    inductor dotted, so currents entering both dotted ends add flux.
// What it does not do: reduce to state space, solve, or integrate.
#include <Eigen/Sparse>
#include <cmath>
#include <mutex>
#include <stdexcept>
#include <string>

#include "mna/descriptor.hpp"
#include "mna/topology.hpp"

namespace ringdown::mna {

struct Network::Impl {
  int node_count = 0;  // gnd included
  int n = 0;
  int m = 0;
  std::vector<std::string> unknown_names;
  std::vector<int> input_elements;   // column j -> element
  std::vector<int> input_of;         // element -> column or -1
  std::vector<int> switches;         // switch k -> element
  std::vector<int> switch_of;        // element -> switch k or -1
  std::vector<int> branch;           // element -> unknown or -1
  std::vector<ElementKind> kinds;    // structure stamp() relies on
  struct Mutual {
    int first, second;  // inductor element indices
    int coupling;       // index into Circuit::couplings
  };
  std::vector<Mutual> mutuals;
  std::vector<int> tied_nodes;                  // node indices tied to gnd
  std::vector<std::vector<int>> inductor_cuts;  // node sets
  std::vector<std::vector<int>> kernel_sets;    // unknowns of each ker C direction
  // Dense basis of ker C, built on first use only: a large network for the
  // sparse engine should not pay n x r doubles it never reads.
  mutable std::once_flag null_space_once;
  mutable Eigen::MatrixXd null_space;
  std::vector<WaveformPtr> gates;               // switch k -> gate (for initial_switches)

  int node_unknown(int node) const { return node <= kGround ? -1 : node - 1; }

  void check_structure(const Circuit& circuit) const {
    if (circuit.elements.size() != kinds.size() ||
        static_cast<int>(circuit.nodes.size()) != node_count) {
      throw std::logic_error("mna::Network: circuit structure differs from the analysed one");
    }
    for (std::size_t e = 0; e < kinds.size(); ++e) {
      if (circuit.elements[e].kind != kinds[e]) {
        throw std::logic_error("mna::Network: element kinds differ from the analysed circuit");
      }
    }
  }

  void check_switch_state(const SwitchState& closed) const {
    if (closed.size() != switches.size()) {
      throw std::invalid_argument("mna::Network: a switch state of " + std::to_string(closed.size()) +
                                  " entries for " + std::to_string(switches.size()) + " switches");
    }
  }

  // Writes every stamp through add(matrix, row, col, value); matrix 0 = C,
  // 1 = G, 2 = B. Rows/columns of gnd (-1) are skipped.
  template <class Add>
  void stamp_into(const Circuit& circuit, const SwitchState& closed, Add&& add_raw) const {
    enum { kC = 0, kG = 1, kB = 2 };
    auto add = [&](int matrix, int row, int col, double value) {
      if (row >= 0 && col >= 0) add_raw(matrix, row, col, value);
    };
    // A conductance (or capacitance) g between nodes a and b.
    auto two_terminal = [&](int matrix, int a, int b, double g) {
      const int ra = node_unknown(a), rb = node_unknown(b);
      add(matrix, ra, ra, g);
      add(matrix, rb, rb, g);
      add(matrix, ra, rb, -g);
      add(matrix, rb, ra, -g);
    };
    // Branch current unknown k leaving a and entering b.
    auto incidence = [&](int k, int a, int b) {
      add(kG, node_unknown(a), k, 1.0);
      add(kG, node_unknown(b), k, -1.0);
    };
    for (std::size_t idx = 0; idx < circuit.elements.size(); ++idx) {
      const Element& e = circuit.elements[idx];
      const int k = branch[idx];
      const int ra = node_unknown(e.a), rb = node_unknown(e.b);
      switch (e.kind) {
        case ElementKind::Resistor: two_terminal(kG, e.a, e.b, 1.0 / e.value); break;
        case ElementKind::Switch: {
          const int s = switch_of[idx];
          const bool is_closed = s >= 0 && static_cast<std::size_t>(s) < closed.size() &&
                                 closed[static_cast<std::size_t>(s)];
          two_terminal(kG, e.a, e.b, 1.0 / (is_closed ? e.closed : e.open));
          break;
        }
        case ElementKind::Capacitor: two_terminal(kC, e.a, e.b, e.value); break;
        case ElementKind::Inductor:
          incidence(k, e.a, e.b);
          add(kC, k, k, e.value);
          add(kG, k, ra, -1.0);
          add(kG, k, rb, 1.0);
          break;
        case ElementKind::VoltageSource:
          incidence(k, e.a, e.b);
          add(kG, k, ra, 1.0);
          add(kG, k, rb, -1.0);
          add(kB, k, input_of[idx], 1.0);
          break;
        case ElementKind::CurrentSource:
          add(kB, ra, input_of[idx], -1.0);
          add(kB, rb, input_of[idx], 1.0);
          break;
        case ElementKind::Vcvs:
          incidence(k, e.a, e.b);
          add(kG, k, ra, 1.0);
          add(kG, k, rb, -1.0);
          add(kG, k, node_unknown(e.control_p), -e.value);
          add(kG, k, node_unknown(e.control_n), e.value);
          break;
        case ElementKind::Ccvs:
          incidence(k, e.a, e.b);
          add(kG, k, ra, 1.0);
          add(kG, k, rb, -1.0);
          add(kG, k, branch[static_cast<std::size_t>(e.through)], -e.value);
          break;
        case ElementKind::Vccs: {
          const int cp = node_unknown(e.control_p), cn = node_unknown(e.control_n);
          add(kG, ra, cp, e.value);
          add(kG, ra, cn, -e.value);
          add(kG, rb, cp, -e.value);
          add(kG, rb, cn, e.value);
          break;
        }
        case ElementKind::Cccs: {
          const int kt = branch[static_cast<std::size_t>(e.through)];
          add(kG, ra, kt, e.value);
          add(kG, rb, kt, -e.value);
          break;
        }
      }
    }
    for (const Mutual& mu : mutuals) {
      const double la = circuit.elements[static_cast<std::size_t>(mu.first)].value;
      const double lb = circuit.elements[static_cast<std::size_t>(mu.second)].value;
      const double mutual =
          circuit.couplings[static_cast<std::size_t>(mu.coupling)].k * std::sqrt(la * lb);
      const int ka = branch[static_cast<std::size_t>(mu.first)];
      const int kb = branch[static_cast<std::size_t>(mu.second)];
      add(kC, ka, kb, mutual);
      add(kC, kb, ka, mutual);
    }
    for (int v : tied_nodes) two_terminal(kG, v, kGround, 1.0 / detail::kFloatingTieOhm);
  }

  LinearMap zero_map() const {
    return {Eigen::RowVectorXd::Zero(n), Eigen::RowVectorXd::Zero(n), Eigen::RowVectorXd::Zero(m)};
  }

  // v(a) - v(b) into `row`, times `scale`.
  void add_voltage(Eigen::RowVectorXd& row, int a, int b, double scale) const {
    if (node_unknown(a) >= 0) row(node_unknown(a)) += scale;
    if (node_unknown(b) >= 0) row(node_unknown(b)) -= scale;
  }

  void add_current(const Circuit& circuit, int element, const SwitchState& closed,
                   LinearMap& map, double scale) const {
    const Element& e = circuit.elements[static_cast<std::size_t>(element)];
    const int k = branch[static_cast<std::size_t>(element)];
    switch (e.kind) {
      case ElementKind::Resistor: add_voltage(map.x_row, e.a, e.b, scale / e.value); break;
      case ElementKind::Switch: {
        const int s = switch_of[static_cast<std::size_t>(element)];
        const bool is_closed = s >= 0 && static_cast<std::size_t>(s) < closed.size() &&
                               closed[static_cast<std::size_t>(s)];
        add_voltage(map.x_row, e.a, e.b, scale / (is_closed ? e.closed : e.open));
        break;
      }
      case ElementKind::Capacitor: add_voltage(map.dx_row, e.a, e.b, scale * e.value); break;
      case ElementKind::Inductor:
      case ElementKind::VoltageSource:
      case ElementKind::Vcvs:
      case ElementKind::Ccvs: map.x_row(k) += scale; break;
      case ElementKind::CurrentSource:
        map.u_row(input_of[static_cast<std::size_t>(element)]) += scale;
        break;
      case ElementKind::Vccs: add_voltage(map.x_row, e.control_p, e.control_n, scale * e.value); break;
      case ElementKind::Cccs:
        map.x_row(branch[static_cast<std::size_t>(e.through)]) += scale * e.value;
        break;
    }
  }
};

std::optional<Network> Network::analyse(const Circuit& circuit, bool strict,
                                        Diagnostics& diagnostics) {
  detail::TopologyResult topology = detail::check_topology(circuit, strict, diagnostics);
  if (!topology.ok) return std::nullopt;

  auto impl = std::make_shared<Impl>();
  const int element_count = static_cast<int>(circuit.elements.size());
  impl->node_count = static_cast<int>(circuit.nodes.size());
  impl->tied_nodes = topology.tied_nodes;
  impl->inductor_cuts = topology.inductor_cuts;
  impl->branch.assign(static_cast<std::size_t>(element_count), -1);
  impl->input_of.assign(static_cast<std::size_t>(element_count), -1);
  impl->switch_of.assign(static_cast<std::size_t>(element_count), -1);
  for (int v = 1; v < impl->node_count; ++v) {
    impl->unknown_names.push_back("v(" + circuit.nodes[static_cast<std::size_t>(v)].name + ")");
  }
  int next = impl->node_count - 1;
  for (int e = 0; e < element_count; ++e) {
    const Element& x = circuit.elements[static_cast<std::size_t>(e)];
    impl->kinds.push_back(x.kind);
    if (detail::has_branch_current(x.kind)) {
      impl->branch[static_cast<std::size_t>(e)] = next++;
      impl->unknown_names.push_back("i(" + x.name + ")");
    }
    if (x.kind == ElementKind::VoltageSource || x.kind == ElementKind::CurrentSource) {
      impl->input_of[static_cast<std::size_t>(e)] = static_cast<int>(impl->input_elements.size());
      impl->input_elements.push_back(e);
    }
    if (x.kind == ElementKind::Switch) {
      impl->switch_of[static_cast<std::size_t>(e)] = static_cast<int>(impl->switches.size());
      impl->switches.push_back(e);
      impl->gates.push_back(x.waveform);
    }
  }
  impl->n = next;
  impl->m = static_cast<int>(impl->input_elements.size());
  for (int c = 0; c < static_cast<int>(circuit.couplings.size()); ++c) {
    const auto& members = circuit.couplings[static_cast<std::size_t>(c)].inductors;
    for (std::size_t i = 0; i < members.size(); ++i) {
      for (std::size_t j = i + 1; j < members.size(); ++j) {
        impl->mutuals.push_back({members[i], members[j], c});
      }
    }
  }

  // ker C from the structure: C = blockdiag(capacitance Laplacian over the
  // nodes, inductance matrix, 0). With every C > 0 the grounded Laplacian's
  // kernel is spanned by the indicators of the capacitor-connected node sets
  // that do not reach gnd (a node without capacitors is such a set alone); the
  // inductance matrix is positive definite (checked); every other branch row
  // is a kernel direction. No numerical rank decision is needed.
  {
    std::vector<int> parent(static_cast<std::size_t>(impl->node_count));
    for (int v = 0; v < impl->node_count; ++v) parent[static_cast<std::size_t>(v)] = v;
    auto find = [&](int v) {
      while (parent[static_cast<std::size_t>(v)] != v) {
        auto& p = parent[static_cast<std::size_t>(v)];
        p = parent[static_cast<std::size_t>(p)];  // path halving
        v = p;
      }
      return v;
    };
    for (const Element& x : circuit.elements) {
      if (x.kind != ElementKind::Capacitor) continue;
      int ra = find(x.a), rb = find(x.b);
      if (ra == rb) continue;
      if (rb == kGround) std::swap(ra, rb);
      parent[static_cast<std::size_t>(rb)] = ra;  // gnd stays a root
    }
    std::vector<std::vector<int>> columns;  // unknown indices per kernel vector
    std::vector<int> column_of_root(static_cast<std::size_t>(impl->node_count), -1);
    for (int v = 1; v < impl->node_count; ++v) {
      const int root = find(v);
      if (root == kGround) continue;
      auto& column = column_of_root[static_cast<std::size_t>(root)];
      if (column < 0) {
        column = static_cast<int>(columns.size());
        columns.emplace_back();
      }
      columns[static_cast<std::size_t>(column)].push_back(v - 1);
    }
    for (int e = 0; e < element_count; ++e) {
      const int k = impl->branch[static_cast<std::size_t>(e)];
      if (k >= 0 && circuit.elements[static_cast<std::size_t>(e)].kind != ElementKind::Inductor) {
        columns.push_back({k});
      }
    }
    impl->kernel_sets = std::move(columns);
  }

  Network network;
  network.impl_ = std::move(impl);
  return network;
}

int Network::unknowns() const { return impl_->n; }
int Network::inputs() const { return impl_->m; }
const std::vector<std::string>& Network::unknown_names() const { return impl_->unknown_names; }
const std::vector<int>& Network::input_elements() const { return impl_->input_elements; }
const std::vector<int>& Network::switches() const { return impl_->switches; }

int Network::branch_unknown(int element) const {
  if (element < 0 || element >= static_cast<int>(impl_->branch.size())) return -1;
  return impl_->branch[static_cast<std::size_t>(element)];
}

int Network::node_unknown(int node) const {
  if (node <= kGround || node >= impl_->node_count) return -1;
  return node - 1;
}

SwitchState Network::initial_switches() const {
  // NETLIST.md: closed while gate(t) > 0.5; before t = 0 a waveform holds its
  // left limit at 0.
  constexpr double kGateThreshold = 0.5;
  SwitchState closed;
  for (const WaveformPtr& gate : impl_->gates) {
    closed.push_back(gate && gate->value_before_zero() > kGateThreshold);
  }
  return closed;
}

Descriptor Network::stamp(const Circuit& circuit, const SwitchState& closed) const {
  impl_->check_structure(circuit);
  impl_->check_switch_state(closed);
  Descriptor d{Eigen::MatrixXd::Zero(impl_->n, impl_->n), Eigen::MatrixXd::Zero(impl_->n, impl_->n),
               Eigen::MatrixXd::Zero(impl_->n, impl_->m)};
  Eigen::MatrixXd* target[3] = {&d.C, &d.G, &d.B};
  impl_->stamp_into(circuit, closed, [&](int matrix, int row, int col, double value) {
    (*target[matrix])(row, col) += value;
  });
  return d;
}

SparseDescriptor Network::stamp_sparse(const Circuit& circuit, const SwitchState& closed) const {
  impl_->check_structure(circuit);
  impl_->check_switch_state(closed);
  std::vector<Eigen::Triplet<double>> triplets[3];
  impl_->stamp_into(circuit, closed, [&](int matrix, int row, int col, double value) {
    triplets[matrix].emplace_back(row, col, value);
  });
  SparseDescriptor d;
  d.C.resize(impl_->n, impl_->n);
  d.G.resize(impl_->n, impl_->n);
  d.B.resize(impl_->n, impl_->m);
  d.C.setFromTriplets(triplets[0].begin(), triplets[0].end());  // duplicates are summed
  d.G.setFromTriplets(triplets[1].begin(), triplets[1].end());
  d.B.setFromTriplets(triplets[2].begin(), triplets[2].end());
  return d;
}

const Eigen::MatrixXd& Network::null_space_of_C() const {
  std::call_once(impl_->null_space_once, [impl = impl_.get()] {
    const auto& sets = impl->kernel_sets;
    impl->null_space = Eigen::MatrixXd::Zero(impl->n, static_cast<Eigen::Index>(sets.size()));
    for (std::size_t c = 0; c < sets.size(); ++c) {
      const double entry = 1.0 / std::sqrt(static_cast<double>(sets[c].size()));
      for (int k : sets[c]) impl->null_space(k, static_cast<Eigen::Index>(c)) = entry;
    }
  });
  return impl_->null_space;
}
const std::vector<int>& Network::tied_nodes() const { return impl_->tied_nodes; }
const std::vector<std::vector<int>>& Network::inductor_cuts() const { return impl_->inductor_cuts; }

LinearMap Network::node_voltage(int node) const {
  LinearMap map = impl_->zero_map();
  if (node_unknown(node) >= 0) map.x_row(node_unknown(node)) = 1.0;
  return map;
}

LinearMap Network::element_current(const Circuit& circuit, int element) const {
  return element_current(circuit, element, initial_switches());
}

LinearMap Network::element_current(const Circuit& circuit, int element,
                                   const SwitchState& closed) const {
  impl_->check_switch_state(closed);
  LinearMap map = impl_->zero_map();
  if (element < 0 || element >= static_cast<int>(circuit.elements.size())) return map;
  impl_->add_current(circuit, element, closed, map, 1.0);
  return map;
}

LinearMap Network::part_voltage(const Circuit& circuit, int part) const {
  LinearMap map = impl_->zero_map();
  if (part < 0 || part >= static_cast<int>(circuit.parts.size())) return map;
  const Part& p = circuit.parts[static_cast<std::size_t>(part)];
  impl_->add_voltage(map.x_row, p.a, p.b, 1.0);
  return map;
}

LinearMap Network::part_current(const Circuit& circuit, int part) const {
  return part_current(circuit, part, initial_switches());
}

LinearMap Network::part_current(const Circuit& circuit, int part, const SwitchState& closed) const {
  impl_->check_switch_state(closed);
  LinearMap map = impl_->zero_map();
  if (part < 0 || part >= static_cast<int>(circuit.parts.size())) return map;
  for (int e : circuit.parts[static_cast<std::size_t>(part)].terminal) {
    impl_->add_current(circuit, e, closed, map, 1.0);
  }
  return map;
}

LinearMap Network::capacitance_voltage(const Circuit& circuit, int part) const {
  LinearMap map = impl_->zero_map();
  if (part < 0 || part >= static_cast<int>(circuit.parts.size())) return map;
  const int main = circuit.parts[static_cast<std::size_t>(part)].main;
  if (main < 0 || main >= static_cast<int>(circuit.elements.size())) return map;
  const Element& e = circuit.elements[static_cast<std::size_t>(main)];
  impl_->add_voltage(map.x_row, e.a, e.b, 1.0);
  return map;
}

LinearMap Network::inductance_current(const Circuit& circuit, int part) const {
  LinearMap map = impl_->zero_map();
  if (part < 0 || part >= static_cast<int>(circuit.parts.size())) return map;
  const int main = circuit.parts[static_cast<std::size_t>(part)].main;
  if (main < 0 || main >= static_cast<int>(circuit.elements.size())) return map;
  impl_->add_current(circuit, main, initial_switches(), map, 1.0);
  return map;
}

}  // namespace ringdown::mna
