// Topology and value checks of the MNA stage: see topology.hpp.
//
// Every check works on the element graph (nodes = circuit nodes, edges =
// two-terminal branches a-b) with union-find; loops are named by the path in
// a spanning forest between the ends of the edge that closes them, cuts by
// the branches leaving one component of a contracted graph. Controlled
// sources count by their output branch only (a vcvs is a voltage-type branch
// between its output nodes; its control port is not an edge). Messages name
// the elements as the circuit names them (hidden parts as "C1.esr") in file
// order, at the position of the first one.
#include "mna/topology.hpp"

#include <fmt/format.h>

#include <Eigen/Cholesky>
#include <Eigen/Dense>
#include <algorithm>
#include <cmath>
#include <map>
#include <numeric>
#include <queue>
#include <set>
#include <string>
#include <utility>

namespace ringdown::mna::detail {
namespace {

// How a branch behaves in the topology rules.
enum class BranchClass { Resistive, Capacitive, Inductive, VoltageType, CurrentType };

BranchClass classify(ElementKind kind) {
  switch (kind) {
    case ElementKind::Resistor:
    case ElementKind::Switch:  // open or closed, a switch is a resistance (a DC path)
      return BranchClass::Resistive;
    case ElementKind::Capacitor: return BranchClass::Capacitive;
    case ElementKind::Inductor: return BranchClass::Inductive;
    case ElementKind::VoltageSource:
    case ElementKind::Vcvs:
    case ElementKind::Ccvs:
      return BranchClass::VoltageType;
    case ElementKind::CurrentSource:
    case ElementKind::Vccs:
    case ElementKind::Cccs:
      return BranchClass::CurrentType;
  }
  return BranchClass::Resistive;
}

class UnionFind {
 public:
  explicit UnionFind(int size) : parent_(static_cast<std::size_t>(size)) {
    std::iota(parent_.begin(), parent_.end(), 0);
  }
  int find(int x) {
    while (parent_[static_cast<std::size_t>(x)] != x) {
      auto& p = parent_[static_cast<std::size_t>(x)];
      p = parent_[static_cast<std::size_t>(p)];  // path halving
      x = p;
    }
    return x;
  }
  // False when already joined (the edge closes a loop).
  bool unite(int a, int b) {
    a = find(a);
    b = find(b);
    if (a == b) return false;
    // Keep gnd (node 0) as a root so "the component of gnd" is find(0) == 0.
    if (b == kGround) std::swap(a, b);
    parent_[static_cast<std::size_t>(b)] = a;
    return true;
  }

 private:
  std::vector<int> parent_;
};

// A spanning forest kept as adjacency lists, to name the loop an edge closes.
class Forest {
 public:
  explicit Forest(int nodes) : adjacent_(static_cast<std::size_t>(nodes)) {}
  void add(int a, int b, int element) {
    adjacent_[static_cast<std::size_t>(a)].push_back({b, element});
    adjacent_[static_cast<std::size_t>(b)].push_back({a, element});
  }
  // Elements on the forest path from `from` to `to` (both in one tree).
  std::vector<int> path(int from, int to) const {
    const std::size_t size = adjacent_.size();
    std::vector<int> via(size, -1), previous(size, -1);
    std::vector<bool> seen(size, false);
    std::queue<int> queue;
    queue.push(from);
    seen[static_cast<std::size_t>(from)] = true;
    while (!queue.empty() && !seen[static_cast<std::size_t>(to)]) {
      const int node = queue.front();
      queue.pop();
      for (const auto& [next, element] : adjacent_[static_cast<std::size_t>(node)]) {
        if (seen[static_cast<std::size_t>(next)]) continue;
        seen[static_cast<std::size_t>(next)] = true;
        via[static_cast<std::size_t>(next)] = element;
        previous[static_cast<std::size_t>(next)] = node;
        queue.push(next);
      }
    }
    std::vector<int> elements;
    for (int node = to; node != from && node >= 0; node = previous[static_cast<std::size_t>(node)]) {
      if (via[static_cast<std::size_t>(node)] < 0) break;
      elements.push_back(via[static_cast<std::size_t>(node)]);
    }
    return elements;
  }

 private:
  std::vector<std::vector<std::pair<int, int>>> adjacent_;
};

// Names listed in messages before "and N more".
constexpr std::size_t kMaxNamesListed = 12;

std::string join_names(const std::vector<std::string>& names) {
  std::string text;
  for (std::size_t k = 0; k < names.size() && k < kMaxNamesListed; ++k) {
    if (k) text += ", ";
    text += names[k];
  }
  if (names.size() > kMaxNamesListed) {
    text += " and " + std::to_string(names.size() - kMaxNamesListed) + " more";
  }
  return text;
}

// Sorted, unique element indices -> "R1, C1".
std::string element_list(const Circuit& circuit, std::vector<int>& elements) {
  std::sort(elements.begin(), elements.end());
  elements.erase(std::unique(elements.begin(), elements.end()), elements.end());
  std::vector<std::string> names;
  for (int e : elements) names.push_back(circuit.elements[static_cast<std::size_t>(e)].name);
  return join_names(names);
}

std::string node_list(const Circuit& circuit, const std::vector<int>& nodes) {
  std::vector<std::string> names;
  for (int v : nodes) names.push_back(circuit.nodes[static_cast<std::size_t>(v)].name);
  return join_names(names);
}

void add(Diagnostics& diagnostics, Severity severity, SourcePosition where, std::string message,
         std::string hint) {
  diagnostics.push_back({severity, std::move(where), std::move(message), std::move(hint)});
}

SourcePosition where_of(const Circuit& circuit, const std::vector<int>& sorted_elements) {
  if (sorted_elements.empty()) return {};
  return circuit.elements[static_cast<std::size_t>(sorted_elements.front())].where;
}

// The user-facing part that owns an element (hidden parts belong to one).
std::string part_name(const Circuit& circuit, int element) {
  const Element& e = circuit.elements[static_cast<std::size_t>(element)];
  if (e.part >= 0 && e.part < static_cast<int>(circuit.parts.size())) {
    return circuit.parts[static_cast<std::size_t>(e.part)].name;
  }
  return e.name;
}

bool finite(double x) { return std::isfinite(x); }

// Nodes 1.. grouped by their union-find root (one pass, so checks stay
// linear in the circuit size however many components there are).
std::map<int, std::vector<int>> nodes_by_root(UnionFind& uf, int node_count) {
  std::map<int, std::vector<int>> groups;
  for (int v = 1; v < node_count; ++v) groups[uf.find(v)].push_back(v);
  return groups;
}

// --- Values and references ---------------------------------------------------

bool check_values(const Circuit& circuit, Diagnostics& diagnostics) {
  bool ok = true;
  const int node_count = static_cast<int>(circuit.nodes.size());
  const int element_count = static_cast<int>(circuit.elements.size());
  auto valid_node = [&](int v) { return v >= 0 && v < node_count; };
  auto error = [&](const Element& e, std::string message, std::string hint = {}) {
    add(diagnostics, Severity::Error, e.where, std::move(message), std::move(hint));
    ok = false;
  };
  for (const Element& e : circuit.elements) {
    if (!valid_node(e.a) || !valid_node(e.b)) {
      error(e, e.name + ": a terminal refers to no node of the circuit");
      continue;
    }
    switch (e.kind) {
      case ElementKind::Resistor:
        if (!finite(e.value) || e.value == 0) {
          error(e, e.name + ": resistance must be finite and not 0",
                "to join the two nodes, give them one name");
        }
        break;
      case ElementKind::Capacitor:
        if (!finite(e.value) || e.value <= 0) {
          error(e, e.name + ": capacitance must be finite and above 0");
        }
        break;
      case ElementKind::Inductor:
        if (!finite(e.value) || e.value <= 0) {
          error(e, e.name + ": inductance must be finite and above 0");
        }
        break;
      case ElementKind::VoltageSource:
      case ElementKind::CurrentSource:
        if (!e.waveform) error(e, e.name + ": source has no waveform");
        break;
      case ElementKind::Switch:
        if (!e.waveform) error(e, e.name + ": switch has no gate waveform");
        if (!finite(e.closed) || e.closed <= 0 || !finite(e.open) || e.open <= 0) {
          error(e, e.name + ": switch resistances closed= and open= must be finite and above 0",
                "an ideal switch (0 Ohm) is not modelled; use a small closed= such as 1m");
        }
        break;
      case ElementKind::Vcvs:
      case ElementKind::Vccs:
        if (!valid_node(e.control_p) || !valid_node(e.control_n)) {
          error(e, e.name + ": control=(...) refers to no node of the circuit");
        }
        if (!finite(e.value)) error(e, e.name + ": gain must be finite");
        break;
      case ElementKind::Ccvs:
      case ElementKind::Cccs:
        if (e.through < 0 || e.through >= element_count ||
            !has_branch_current(circuit.elements[static_cast<std::size_t>(e.through)].kind)) {
          error(e, e.name + ": through= must name a voltage source, an inductor or a vcvs/ccvs",
                "to sense the current of another branch, put a 0 V voltage source in series "
                "with it and name that");
        }
        if (!finite(e.value)) error(e, e.name + ": gain must be finite");
        break;
    }
  }
  return ok;
}

bool check_couplings(const Circuit& circuit, Diagnostics& diagnostics) {
  bool ok = true;
  const int element_count = static_cast<int>(circuit.elements.size());
  std::map<std::pair<int, int>, std::string> coupled_pairs;  // pair -> coupling name
  // Groups of inductors linked by couplings, for the positive-definiteness check.
  UnionFind groups(std::max(element_count, 1));
  std::vector<bool> coupled(static_cast<std::size_t>(element_count), false);
  for (const Coupling& c : circuit.couplings) {
    bool members_ok = true;
    for (int l : c.inductors) {
      if (l < 0 || l >= element_count ||
          circuit.elements[static_cast<std::size_t>(l)].kind != ElementKind::Inductor) {
        add(diagnostics, Severity::Error, c.where, "couple " + c.name + ": every member must be an inductor", {});
        members_ok = false;
        break;
      }
    }
    if (!members_ok) {
      ok = false;
      continue;
    }
    if (!finite(c.k) || std::abs(c.k) >= 1) {
      add(diagnostics, Severity::Error, c.where,
          "couple " + c.name + ": k = " + fmt::format("{:g}", c.k) + ", but abs(k) must be below 1",
          "k = 1 makes the inductance matrix singular; a tight transformer is k = 0.999 or so");
      ok = false;
      continue;
    }
    for (std::size_t i = 0; i < c.inductors.size(); ++i) {
      for (std::size_t j = i + 1; j < c.inductors.size(); ++j) {
        int a = c.inductors[i], b = c.inductors[j];
        if (a == b) {
          add(diagnostics, Severity::Error, c.where,
              "couple " + c.name + ": " + circuit.elements[static_cast<std::size_t>(a)].name +
                  " is listed twice",
              {});
          ok = false;
          continue;
        }
        auto key = std::minmax(a, b);
        auto [it, inserted] = coupled_pairs.emplace(key, c.name);
        if (!inserted) {
          add(diagnostics, Severity::Error, c.where,
              "couple " + c.name + ": " + circuit.elements[static_cast<std::size_t>(a)].name +
                  " and " + circuit.elements[static_cast<std::size_t>(b)].name +
                  " are already coupled by " + it->second,
              "give each pair of inductors one coupling");
          ok = false;
          continue;
        }
        groups.unite(a, b);
        coupled[static_cast<std::size_t>(a)] = coupled[static_cast<std::size_t>(b)] = true;
      }
    }
  }
  if (!ok) return false;
  // Several couplings sharing inductors can give an indefinite inductance
  // matrix even with every abs(k) < 1 (a negative stored energy): check each
  // group by Cholesky (Golub & Van Loan, Matrix Computations, from memory).
  std::map<int, std::vector<int>> members;
  for (int e = 0; e < element_count; ++e) {
    if (coupled[static_cast<std::size_t>(e)]) members[groups.find(e)].push_back(e);
  }
  for (const auto& [root, group] : members) {
    const auto size = static_cast<Eigen::Index>(group.size());
    Eigen::MatrixXd normalized = Eigen::MatrixXd::Identity(size, size);  // M / sqrt(La Lb)
    for (Eigen::Index i = 0; i < size; ++i) {
      for (Eigen::Index j = 0; j < size; ++j) {
        auto it = coupled_pairs.find(std::minmax(group[static_cast<std::size_t>(i)],
                                                 group[static_cast<std::size_t>(j)]));
        if (i != j && it != coupled_pairs.end()) {
          for (const Coupling& c : circuit.couplings) {
            if (c.name == it->second) normalized(i, j) = c.k;
          }
        }
      }
    }
    Eigen::LLT<Eigen::MatrixXd> llt(normalized);
    if (llt.info() != Eigen::Success) {
      std::vector<int> sorted = group;
      const std::string names = element_list(circuit, sorted);
      add(diagnostics, Severity::Error, where_of(circuit, sorted),
          "the couplings among " + names +
              " give an inductance matrix that is not positive definite (negative stored energy)",
          "lower some of the k values of these couplings");
      ok = false;
    }
  }
  return ok;
}

}  // namespace

bool has_branch_current(ElementKind kind) {
  return kind == ElementKind::Inductor || kind == ElementKind::VoltageSource ||
         kind == ElementKind::Vcvs || kind == ElementKind::Ccvs;
}

TopologyResult check_topology(const Circuit& circuit, bool strict, Diagnostics& diagnostics) {
  TopologyResult result;
  const int node_count = static_cast<int>(circuit.nodes.size());
  const int element_count = static_cast<int>(circuit.elements.size());
  if (node_count == 0) {
    add(diagnostics, Severity::Error, {}, "the circuit has no nodes (not even gnd)", {});
    result.ok = false;
    return result;
  }
  if (!check_values(circuit, diagnostics)) {
    result.ok = false;
    return result;  // the graph checks below rely on valid node indices
  }
  if (!check_couplings(circuit, diagnostics)) result.ok = false;

  std::vector<BranchClass> cls(static_cast<std::size_t>(element_count));
  for (int e = 0; e < element_count; ++e) {
    cls[static_cast<std::size_t>(e)] = classify(circuit.elements[static_cast<std::size_t>(e)].kind);
  }
  auto is = [&](int e, BranchClass c) { return cls[static_cast<std::size_t>(e)] == c; };
  auto element = [&](int e) -> const Element& { return circuit.elements[static_cast<std::size_t>(e)]; };

  // 1. Loops of voltage-type branches alone.
  Forest voltage_forest(node_count);
  std::vector<int> voltage_tree;  // voltage-type branches that closed no such loop
  {
    UnionFind uf(node_count);
    for (int e = 0; e < element_count; ++e) {
      if (!is(e, BranchClass::VoltageType)) continue;
      const Element& x = element(e);
      if (uf.unite(x.a, x.b)) {
        voltage_forest.add(x.a, x.b, e);
        voltage_tree.push_back(e);
        continue;
      }
      std::vector<int> loop = voltage_forest.path(x.a, x.b);
      loop.push_back(e);
      const std::string names = element_list(circuit, loop);
      add(diagnostics, Severity::Error, where_of(circuit, loop),
          (loop.size() == 1 ? "voltage-type branch " + names + " is shorted on itself (both ends on one node)"
                            : "voltage sources " + names + " form a loop on their own"),
          "a loop of voltage sources (voltage, vcvs, ccvs) fixes no current and contradicts itself "
          "unless the voltages add up to zero; put a resistor in series with one of them, or "
          "remove one");
      result.ok = false;
    }
  }

  // 2. Cuts of current-type branches alone: contract every other branch; a
  //    component without gnd that current-type branches leave is such a cut.
  UnionFind non_current(node_count);
  for (int e = 0; e < element_count; ++e) {
    if (!is(e, BranchClass::CurrentType)) non_current.unite(element(e).a, element(e).b);
  }
  std::vector<bool> in_current_cut(static_cast<std::size_t>(node_count), false);
  {
    std::map<int, std::vector<int>> crossing;  // component root -> current-type branches leaving it
    for (int e = 0; e < element_count; ++e) {
      if (!is(e, BranchClass::CurrentType)) continue;
      const int ra = non_current.find(element(e).a), rb = non_current.find(element(e).b);
      if (ra == rb) continue;
      if (ra != kGround) crossing[ra].push_back(e);
      if (rb != kGround) crossing[rb].push_back(e);
    }
    std::set<std::vector<int>> reported;
    auto members = nodes_by_root(non_current, node_count);
    for (auto& [root, cut] : crossing) {
      const std::vector<int>& nodes = members[root];
      for (int v : nodes) in_current_cut[static_cast<std::size_t>(v)] = true;
      const std::string names = element_list(circuit, cut);
      if (!reported.insert(cut).second) continue;
      add(diagnostics, Severity::Error, where_of(circuit, cut),
          "current sources " + names + " form a cut on their own: node" +
              (nodes.size() == 1 ? " " : "s ") + node_list(circuit, nodes) +
              (nodes.size() == 1 ? " is" : " are") + " reached only through them",
          "the voltage of such nodes is undetermined and KCL contradicts itself unless the "
          "currents balance; add a resistor from one of the nodes to gnd, or across a source");
      result.ok = false;
    }
  }

  // 3. No DC path to gnd: contract resistive, inductive and voltage-type
  //    branches (the DC paths); tie each component without gnd to gnd.
  std::vector<bool> tied(static_cast<std::size_t>(node_count), false);
  {
    UnionFind dc(node_count);
    for (int e = 0; e < element_count; ++e) {
      if (is(e, BranchClass::Resistive) || is(e, BranchClass::Inductive) ||
          is(e, BranchClass::VoltageType)) {
        dc.unite(element(e).a, element(e).b);
      }
    }
    std::map<int, std::vector<int>> floating;  // root -> nodes
    for (int v = 1; v < node_count; ++v) {
      if (dc.find(v) != kGround && !in_current_cut[static_cast<std::size_t>(v)]) {
        floating[dc.find(v)].push_back(v);
      }
    }
    // In order of the first node of each subnetwork.
    std::vector<std::vector<int>> groups;
    for (auto& [root, nodes] : floating) groups.push_back(nodes);
    std::sort(groups.begin(), groups.end());
    std::map<int, std::vector<int>> touching_root;  // DC root -> elements with an end there
    for (int e = 0; e < element_count; ++e) {
      const int ra = dc.find(element(e).a), rb = dc.find(element(e).b);
      if (ra != kGround) touching_root[ra].push_back(e);
      if (rb != kGround && rb != ra) touching_root[rb].push_back(e);
    }
    for (const auto& nodes : groups) {
      std::vector<int> touching = touching_root[dc.find(nodes.front())];
      const std::string elements = element_list(circuit, touching);
      SourcePosition where = touching.empty()
                                 ? circuit.nodes[static_cast<std::size_t>(nodes.front())].where
                                 : where_of(circuit, touching);
      const std::string message = std::string(nodes.size() == 1 ? "node " : "nodes ") +
                                  node_list(circuit, nodes) + " (" +
                                  (touching.empty() ? std::string("no elements") : elements) +
                                  (nodes.size() == 1 ? ") has" : ") have") + " no DC path to gnd";
      if (strict) {
        add(diagnostics, Severity::Error, where, message + " (an error under --strict)",
            "connect the subnetwork to gnd, e.g. with a resistor from " +
                circuit.nodes[static_cast<std::size_t>(nodes.front())].name + " to gnd");
        result.ok = false;
      } else {
        add(diagnostics, Severity::Warning, where,
            message + "; tied to gnd through a hidden 1 GOhm at " +
                circuit.nodes[static_cast<std::size_t>(nodes.front())].name,
            "connect the subnetwork to gnd yourself (a resistor or a gnd node) to choose its "
            "DC level");
      }
      result.tied_nodes.push_back(nodes.front());
      tied[static_cast<std::size_t>(nodes.front())] = true;
    }
  }

  // 4. Loops of capacitors and voltage-type branches with at least one of the
  //    latter: capacitors first (a loop of capacitors alone is harmless), then
  //    the voltage-type branches that closed no voltage-only loop.
  {
    UnionFind uf(node_count);
    Forest forest(node_count);
    for (int e = 0; e < element_count; ++e) {
      if (!is(e, BranchClass::Capacitive)) continue;
      if (uf.unite(element(e).a, element(e).b)) forest.add(element(e).a, element(e).b, e);
    }
    for (int e : voltage_tree) {
      const Element& x = element(e);
      if (uf.unite(x.a, x.b)) {
        forest.add(x.a, x.b, e);
        continue;
      }
      std::vector<int> loop = forest.path(x.a, x.b);
      loop.push_back(e);
      const std::string names = element_list(circuit, loop);
      std::string capacitor;
      for (int k : loop) {
        if (is(k, BranchClass::Capacitive) && !element(k).hidden) {
          capacitor = part_name(circuit, k);
          break;
        }
      }
      add(diagnostics, Severity::Error, where_of(circuit, loop),
          "capacitors and voltage sources " + names +
              " form a loop: the capacitor currents would follow the derivative of the source "
              "voltage (index-2 equations), which this version does not solve",
          capacitor.empty()
              ? std::string("put a resistor in series with the loop")
              : "add series resistance to a capacitor of the loop, e.g. esr=10m on " + capacitor);
      result.ok = false;
    }
  }

  // 5. Cuts of inductors and current-type branches with at least one of the
  //    latter: contract resistive, capacitive and voltage-type branches and
  //    the hidden ties; a current-type branch between two components lies in
  //    the cut around the component of its end away from gnd.
  {
    UnionFind uf(node_count);
    for (int e = 0; e < element_count; ++e) {
      if (is(e, BranchClass::Resistive) || is(e, BranchClass::Capacitive) ||
          is(e, BranchClass::VoltageType)) {
        uf.unite(element(e).a, element(e).b);
      }
    }
    for (int v : result.tied_nodes) uf.unite(v, kGround);
    std::map<int, std::vector<int>> leaving;  // component root -> inductive/current branches leaving
    for (int e = 0; e < element_count; ++e) {
      if (!is(e, BranchClass::Inductive) && !is(e, BranchClass::CurrentType)) continue;
      const int ra = uf.find(element(e).a), rb = uf.find(element(e).b);
      if (ra == rb) continue;
      leaving[ra].push_back(e);
      leaving[rb].push_back(e);
    }
    auto members = nodes_by_root(uf, node_count);
    for (auto& [root, cut] : leaving) {
      if (root == kGround) continue;  // its cut is the union of the others'
      bool any_inductor = false, any_source = false;
      for (int e : cut) {
        any_inductor = any_inductor || is(e, BranchClass::Inductive);
        any_source = any_source || is(e, BranchClass::CurrentType);
      }
      if (!any_inductor) continue;  // a cut of current sources alone: reported in 2.
      const std::vector<int>& nodes = members[root];  // a cut of current sources alone: reported in 2.
      if (!any_source) {
        result.inductor_cuts.push_back(nodes);
        continue;
      }
      const std::string names = element_list(circuit, cut);
      std::string inductor;
      for (int k : cut) {
        if (is(k, BranchClass::Inductive) && !element(k).hidden) {
          inductor = part_name(circuit, k);
          break;
        }
      }
      add(diagnostics, Severity::Error, where_of(circuit, cut),
          "inductors and current sources " + names +
              " form a cut: the inductor voltages would follow the derivative of the source "
              "current (index-2 equations), which this version does not solve",
          inductor.empty() ? std::string("put a resistor across one of the current sources")
                           : "add parallel resistance to an inductor of the cut, e.g. rpar=1M on " +
                                 inductor);
      result.ok = false;
    }
  }
  return result;
}

}  // namespace ringdown::mna::detail
