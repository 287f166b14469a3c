// Modified nodal analysis: Circuit -> descriptor system
//     C x' + G x = B u(t),     y = Lx x + Ldx x' + Lu u
// Unknowns x: node voltages of nodes 1..N-1 (gnd excluded; unknown k is node
// k+1), then branch currents: inductances, voltage sources, vcvs, ccvs, in
// element order. Inputs u: one column of B per independent source (voltage
// or current), in element order. Stamps follow the passive sign convention
// of NETLIST.md. C holds capacitances and the inductance matrix (mutual terms
// from `couple`); G conductances, incidence and controlled-source gains.
// Switches change G only, so C and the set of unknowns stay the same across
// switching.
// Rows (mna/network.cpp has the full list): KCL rows sum the currents
// leaving a node; an inductor's row is L di/dt + sum M di_j/dt - (va - vb) = 0
// (C symmetric positive semi-definite); a voltage source's va - vb = u; a
// current source's u leaves a (B = -1 at a, +1 at b).
//
// Structure is analysed once (Network::analyse); values are restamped cheaply
// for each switch configuration or sweep point (Network::stamp).
#pragma once

#include <Eigen/Dense>
#include <Eigen/Sparse>
#include <memory>
#include <optional>
#include <string>
#include <vector>

#include "parser/circuit.hpp"
#include "parser/diagnostic.hpp"

namespace ringdown::mna {

struct Descriptor {
  Eigen::MatrixXd C;  // n x n
  Eigen::MatrixXd G;  // n x n
  Eigen::MatrixXd B;  // n x m
};

// The same matrices in compressed sparse form, for the sparse engine
// (stamped from the same structure; duplicate entries summed).
struct SparseDescriptor {
  Eigen::SparseMatrix<double> C;
  Eigen::SparseMatrix<double> G;
  Eigen::SparseMatrix<double> B;
};

// A recordable base signal as a linear map of the unknowns, their time
// derivative and the inputs: y = x_row . x + dx_row . x' + u_row . u.
// (A capacitor's current needs x'; everything else uses x and u only.)
struct LinearMap {
  Eigen::RowVectorXd x_row;
  Eigen::RowVectorXd dx_row;
  Eigen::RowVectorXd u_row;
};

// Switch configuration: closed[k] for switch k (Network::switches()[k]).
using SwitchState = std::vector<bool>;

class Network {
 public:
  // Builds the structure and runs the topology checks (ARCHITECTURE.md):
  // loops of voltage sources, cuts of current sources, index-2 loops/cuts,
  // |k| >= 1 couplings; floating subnetworks are tied to gnd through a hidden
  // 1 GOhm with a warning (an error when `strict`). Returns nullopt when an
  // error was found; diagnostics name the elements and give a hint.
  static std::optional<Network> analyse(const Circuit& circuit, bool strict,
                                        Diagnostics& diagnostics);

  int unknowns() const;  // n
  int inputs() const;    // m
  const std::vector<std::string>& unknown_names() const;  // "v(drain)", "i(L1)", ...
  const std::vector<int>& input_elements() const;         // column j of B -> element index
  const std::vector<int>& switches() const;               // switch k -> element index
  // Unknown index of an element's branch current (inductance, voltage
  // source, vcvs, ccvs), or -1.
  int branch_unknown(int element) const;
  // Unknown index of a node's voltage, -1 for gnd.
  int node_unknown(int node) const;

  // Initial switch states: gate value just before t = 0.
  SwitchState initial_switches() const;

  // Values stamped for one switch configuration (values from `circuit`,
  // which must have the same structure as the analysed one: sweeps and
  // trials restamp changed values without re-analysing). `closed` has one
  // entry per switch; a wrong size or structure throws (a programming error,
  // std::invalid_argument / std::logic_error), never silently stamps.
  Descriptor stamp(const Circuit& circuit, const SwitchState& closed) const;
  SparseDescriptor stamp_sparse(const Circuit& circuit, const SwitchState& closed) const;

  // Orthonormal basis (n x r) of ker C = ker C^T, found from the structure
  // alone (C is symmetric positive semi-definite in this formulation): one
  // column per capacitor-connected node set that does not reach gnd (its
  // indicator, normalised; a node without capacitors is such a set alone),
  // and one unit column per branch unknown of a voltage source, vcvs or ccvs.
  // n - r is the number of differential unknowns. Values do not change it.
  // Built on first call (thread-safe); analyse() itself keeps only the sets.
  const Eigen::MatrixXd& null_space_of_C() const;
  // Nodes tied to gnd through the hidden 1 GOhm (one per floating subnetwork).
  const std::vector<int>& tied_nodes() const;
  // Node sets whose cut consists of inductors only (no source): their
  // inductor currents are tied by KCL, so the MNA equations are formally of
  // index 2 there (no source derivative appears); C x' + G x = B u is still a
  // regular pencil. Listed so the reduction can handle them.
  const std::vector<std::vector<int>>& inductor_cuts() const;

  LinearMap node_voltage(int node) const;
  // A resistor's current is v/R; a switch's depends on its state: the
  // two-argument forms use initial_switches(), pass `closed` otherwise.
  LinearMap element_current(const Circuit& circuit, int element) const;
  LinearMap element_current(const Circuit& circuit, int element, const SwitchState& closed) const;
  // Part terminal quantities (NETLIST.md section 4); power is the product
  // of part_voltage and part_current, formed by the caller.
  LinearMap part_voltage(const Circuit& circuit, int part) const;
  LinearMap part_current(const Circuit& circuit, int part) const;
  LinearMap part_current(const Circuit& circuit, int part, const SwitchState& closed) const;
  LinearMap capacitance_voltage(const Circuit& circuit, int part) const;
  LinearMap inductance_current(const Circuit& circuit, int part) const;

 private:
  struct Impl;
  std::shared_ptr<const Impl> impl_;
};

}  // namespace ringdown::mna
