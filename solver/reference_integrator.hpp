// Reference integrator: the classic fixed-step trapezoidal rule and BDF2 on
// the MNA descriptor system C x' + G x = B u(t) itself (no state-space
// reduction), to cross-check the exact engine and to show, in benchmarks,
// what accuracy the classic methods give at equal cost (ARCHITECTURE.md,
// "Other engines").
//
// The time axis is cut at every source corner and switch-gate crossing (gate
// level 0.5); at each such instant, and at t = 0, the state is made consistent
// with the new inputs and switch configuration by keeping C x (capacitor
// charges, inductor fluxes) and solving the algebraic equations
// (x+ = x- + N y with N = ker C from mna::Network::null_space_of_C()). The
// trapezoidal rule then starts from a consistent point (no spurious +-
// ringing of algebraic unknowns); BDF2 starts with one trapezoidal step after
// each such restart and after any step shorter than h.
// Not here: error control (fixed step only), `formula` fitting (formula
// sources are simply evaluated at the step ends), state-space outputs.
#pragma once

#include <Eigen/Dense>
#include <vector>

#include "mna/descriptor.hpp"
#include "parser/circuit.hpp"
#include "parser/diagnostic.hpp"

namespace ringdown::solver {

enum class ReferenceMethod {
  Trapezoidal,  // (2C/h + G) x1 = (2C/h - G) x0 + B (u0 + u1): order 2, A-stable
  Bdf2,         // (3C/2h + G) x2 = C (4 x1 - x0) / 2h + B u2: order 2, L-stable
};

const char* method_name(ReferenceMethod method);  // "trapezoidal", "bdf2"

struct ReferenceSolution {
  std::vector<double> times;   // t_k = k * every, k = 0 .. N (N as NETLIST.md section 7)
  Eigen::MatrixXd states;      // n x (N + 1): column k is x(t_k) (right limit at an event)
  long steps = 0;              // integration steps taken (partial steps to events included)
  long restarts = 0;           // consistent restarts (t = 0 and every event instant)
  Diagnostics diagnostics;     // errors: singular step matrix, non-finite state
  bool ok() const { return !has_errors(diagnostics); }
};

// Integrates from t = 0 (state x0 just before 0: the operating point or zero)
// to `until`, output every `every`, with `substeps` equal steps per output
// step (h = every / substeps). Inputs u_j(t) are the waveforms of the
// network's input elements; switches follow their gates (closed while
// gate > 0.5; at t = 0 the state is gate(0) > 0.5).
ReferenceSolution integrate_reference(const Circuit& circuit, const mna::Network& network,
                                      double until, double every, ReferenceMethod method,
                                      const Eigen::VectorXd& x0, int substeps = 1);

}  // namespace ringdown::solver
