// Topology checks of the MNA stage (internal to mna/; not a public header).
//
// Decides, from the graph of the flat circuit alone (union-find and searches
// in spanning forests, never a numerical rank), whether the MNA equations of
// NETLIST.md's elements are well posed and of index at most 1:
//  - a loop of voltage-type branches alone (voltage sources, vcvs, ccvs);
//  - a cut of current-type branches alone (current sources, vccs, cccs);
//  - a loop of capacitors and voltage-type branches with at least one of the
//    latter (index 2);
//  - a cut of inductors and current-type branches with at least one of the
//    latter (index 2);
//  - a subnetwork without a DC path to gnd (tied to gnd through a hidden
//    1 GOhm, with a warning, or an error when strict).
// It also checks element values and references that the stamps rely on
// (R != 0, C > 0, L > 0, switch resistances > 0, |k| < 1, `through=` names a
// branch-current element, a positive-definite inductance matrix per group of
// coupled inductors). It does not stamp anything.
//
// Background (from memory): the index-2 conditions are those of
// D. Estevez Schwarz and C. Tischendorf, "Structural analysis of electric
// circuits and consequences for MNA", Int. J. Circuit Theory Appl. 28 (2000).
#pragma once

#include <vector>

#include "parser/circuit.hpp"
#include "parser/diagnostic.hpp"

namespace ringdown::mna::detail {

// Resistance of the hidden tie of a floating subnetwork to gnd
// (ARCHITECTURE.md, "Equations": "a hidden 1 GOhm").
inline constexpr double kFloatingTieOhm = 1e9;

struct TopologyResult {
  bool ok = true;                 // no error found
  std::vector<int> tied_nodes;    // one node per floating subnetwork, tied to gnd
  // Node sets (gnd excluded) each forming a cut made only of inductors: the
  // currents of those inductors are tied by KCL (the equations are formally
  // of index 2, but without source derivatives). Reported for the solver.
  std::vector<std::vector<int>> inductor_cuts;
};

// Runs every check; appends diagnostics (errors, warnings) in a fixed order.
TopologyResult check_topology(const Circuit& circuit, bool strict, Diagnostics& diagnostics);

// True for the branch kinds that carry an MNA branch-current unknown.
bool has_branch_current(ElementKind kind);

}  // namespace ringdown::mna::detail
