// Index-1 reduction of the MNA descriptor system to state space.
//
//     C x' + G x = B u     ->     x_s' = A x_s + B_s u,    x = T x_s + D_x u
//
// The split into differential and algebraic coordinates is decided from the
// circuit's structure, never from a singular-value tolerance: C is
// block-diagonal with the node capacitance matrix (a weighted Laplacian of the
// capacitor graph) and the inductance matrix. The kernel of a Laplacian is
// known exactly: vectors constant on each connected component of the
// capacitor graph (zero on the component holding gnd). So the states are
//   - every node touched by a capacitance, except one root node per capacitor
//     component that does not reach gnd (its voltage is then taken relative
//     to that root: the "capacitor forest" of ARCHITECTURE.md), and
//   - every inductance current;
// and the algebraic coordinates are one merged unknown per floating capacitor
// component plus every other unknown. Both changes of basis are 0/1 matrices,
// so forming the blocks costs no rounding beyond sums of conductances; the
// blocks are then equilibrated before they are factored, which is why 1 fF
// and 1 H in one circuit reduce without loss.
//
// Not here: the choice of switch configuration (transient.cpp), propagation
// (propagation.hpp), index-2 configurations (rejected by mna; if one slips
// through, the algebraic block is singular and reduce() names the unknowns).
#pragma once

#include <Eigen/Dense>
#include <string>
#include <utility>
#include <vector>

#include "mna/descriptor.hpp"

namespace ringdown::solver {

// Where the capacitances and inductances sit among the MNA unknowns.
struct DifferentialStructure {
  // One entry per capacitance: unknown index of each end, -1 for gnd.
  std::vector<std::pair<int, int>> capacitor_branches;
  // Their values (F), to choose the spanning forest; empty: all equal.
  std::vector<double> capacitances;
  // Unknown index of each inductance's current.
  std::vector<int> inductor_unknowns;
};

// The differential structure of a circuit, with the element behind each
// capacitor branch and each inductance current. Zero capacitances carry no
// state. Shared by the transient engine and the modes analysis so that both
// see the same states.
struct StateElements {
  DifferentialStructure structure;
  std::vector<int> capacitor_elements;  // element index per capacitor branch
  std::vector<int> inductor_elements;   // element index per inductor unknown
};
StateElements state_elements(const Circuit& circuit, const mna::Network& network);

// The change of coordinates x = V1 x_d + V2 x_a fixed by the structure.
// The capacitor states are the branch voltages of a spanning forest of the
// capacitor graph (largest capacitances first, Kruskal 1956): with them the
// reduced capacitance matrix V1^T C V1 is diagonal for a forest and close to
// it otherwise, whereas node voltages would make it as ill-conditioned as the
// ratio of a large floating capacitor to a small grounded one.
// Independent of element values and switch states: every configuration of a
// circuit shares it, so x_d (capacitance voltages relative to their roots and
// inductance currents) is the physical state carried across switching.
struct StatePartition {
  int unknowns = 0;
  std::vector<int> state_unknown;  // state k is unknown state_unknown[k] ...
  std::vector<int> state_root;     // ... minus unknown state_root[k] (-1: none)
  std::vector<std::vector<int>> state_nodes;  // V1 column k: indicator set (subtree)
  std::vector<std::vector<int>> algebraic_groups;  // V2 columns: indicator sets
  std::vector<int> group_of;       // unknown -> its algebraic group, -1 if a state
};

// Builds the partition. `C` (any configuration's) only picks, among the
// nodes of a floating capacitor component, the root with the largest
// diagonal capacitance.
StatePartition partition_states(const DifferentialStructure& structure, int unknowns,
                                const Eigen::MatrixXd& C);

struct StateSpace {
  Eigen::MatrixXd A;    // r x r
  Eigen::MatrixXd B;    // r x m
  Eigen::MatrixXd T;    // n x r
  Eigen::MatrixXd D;    // n x m
  // The same reduced system in descriptor form, C11 x_s' + Gs x_s = Bs u,
  // each block at its natural scale (what a stiff propagator wants).
  Eigen::MatrixXd C11;  // r x r
  Eigen::MatrixXd Gs;   // r x r  (Schur complement G11 - G12 G22^-1 G21)
  Eigen::MatrixXd Bs;   // r x m
};

struct ReductionResult {
  bool ok = false;
  StateSpace system;
  std::string message;             // why it failed
  std::vector<int> unknowns;       // unknowns taking part in the failure
  double condition = 0;            // estimate for the algebraic block (1 / rcond)
};

// Reduces one configuration's descriptor with the given partition.
ReductionResult reduce(const mna::Descriptor& descriptor, const StatePartition& partition);

// x_d from a full vector of unknowns (the inverse of the partition's V1 part).
Eigen::VectorXd states_from_unknowns(const StatePartition& partition, const Eigen::VectorXd& x);

// Diagonal equilibration of a general matrix: row scales r and column scales
// c (powers of two, so scaling is exact) such that diag(r) M diag(c) has
// every row and column of largest magnitude near 1. Zero rows/columns get 1.
void equilibrate(const Eigen::MatrixXd& M, Eigen::VectorXd& r, Eigen::VectorXd& c);

}  // namespace ringdown::solver
