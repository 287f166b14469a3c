// The state at t = 0: DC operating point or zero, with v0/i0 holds
// (NETLIST.md section 7, `transient ... initial=dc|zero`; section 4, v0/i0).
//
// DC: with the sources at their values just before 0 and the switches in
// their state before 0, the MNA equations with C x' dropped (capacitances
// open, inductances shorted) are G x = B u. A held capacitance becomes a
// voltage source of v0 (one extra unknown, its current), a held inductance a
// current source of i0 (its short-circuit row replaced by i_L = i0). The
// system is equilibrated and solved by LU; when it is singular (a loop of
// inductances leaves a circulating current undetermined) and consistent, the
// solution of least stored energy is taken (columns weighted by sqrt(L) and
// sqrt(C), minimum norm by a complete orthogonal decomposition): the loop
// carries no flux, as after a power-up from rest. When it is inconsistent,
// the holds contradict the network: the equations in the residual's support
// name the elements.
//
// Zero: every state 0 except the holds; held capacitances get their v0 by a
// union-find over the capacitor graph with potential offsets (two held
// capacitances in parallel at different voltages are an error naming both).
#pragma once

#include <Eigen/Dense>
#include <string>
#include <utility>
#include <vector>

#include "mna/descriptor.hpp"
#include "parser/circuit.hpp"
#include "parser/diagnostic.hpp"
#include "solver/state_space.hpp"

namespace ringdown::solver {

struct CapacitorHold {
  int a = -1, b = -1;  // unknowns of the ends, -1 = gnd
  double v0 = 0;
  int element = -1;
};
struct InductorHold {
  int unknown = -1;    // the inductance current's unknown
  double i0 = 0;
  int element = -1;
};

struct DcProblem {
  Eigen::MatrixXd G;            // n x n, the configuration before 0
  Eigen::VectorXd rhs;          // B u(0-)
  Eigen::VectorXd weights;      // n: |C_ii| (energy weights; 0 for algebraic unknowns)
  std::vector<CapacitorHold> capacitors;
  std::vector<InductorHold> inductors;
};

struct DcSolution {
  bool ok = false;
  bool singular = false;        // solved through the least-energy fallback
  Eigen::VectorXd x;            // n unknowns
  std::vector<int> rows;        // inconsistent: equation rows involved (n + k = capacitor hold k)
  double condition = 0;
};

DcSolution solve_dc(const DcProblem& problem);

// Zero initial state with holds. On a contradiction returns false and
// names the two capacitances in `conflict`.
bool zero_state(const StatePartition& partition,
                const std::vector<std::pair<int, int>>& capacitor_branches,
                const std::vector<CapacitorHold>& capacitors,
                const std::vector<InductorHold>& inductors, Eigen::VectorXd& xd,
                std::vector<int>& conflict);

}  // namespace ringdown::solver
