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
//
// Structure is analysed once (Network::analyse); values are restamped cheaply
// for each switch configuration or sweep point (Network::stamp).
#pragma once

#include <Eigen/Dense>
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
  // trials restamp changed values without re-analysing).
  Descriptor stamp(const Circuit& circuit, const SwitchState& closed) const;

  LinearMap node_voltage(int node) const;
  LinearMap element_current(const Circuit& circuit, int element) const;
  // Part terminal quantities (NETLIST.md section 4); power is the product
  // of part_voltage and part_current, formed by the caller.
  LinearMap part_voltage(const Circuit& circuit, int part) const;
  LinearMap part_current(const Circuit& circuit, int part) const;
  LinearMap capacitance_voltage(const Circuit& circuit, int part) const;
  LinearMap inductance_current(const Circuit& circuit, int part) const;

 private:
  struct Impl;
  std::shared_ptr<const Impl> impl_;
};

}  // namespace ringdown::mna
