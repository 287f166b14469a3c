// Figures of NETLIST.md section 7 (max, rise, settle, energy, ...) on the exact solution,
// and the comparison of an `expect`.
//
// Every figure reads a Trajectory (trajectory.hpp): extrema, crossings, rise and settling
// instants are bracketed on the output grid (refined a few points per interval, or, when the
// trajectory gives Trajectory::bracket_step(), at that spacing and no finer), then located
// by Brent's method on value() or
// derivative() to about 1e-13 of the window in time; integrals (mean, rms, integral, energy,
// power) use adaptive Gauss-Legendre quadrature between consecutive samples and corners,
// good to about 1e-12 relative. Nothing here reads the sample grid alone.
//
// What this module does not do: build the trajectory (the engine), evaluate signal
// expressions (the engine supplies each signal as an index into its trajectory), parse
// figures or convert percentages (the parser stores 10% as 0.1 in FigureCall::args), or
// print (values come back with their unit; cli formats them).
#pragma once

#include <cstddef>
#include <memory>
#include <optional>
#include <string>
#include <utility>

#include "parser/circuit.hpp"
#include "parser/units.hpp"
#include "solver/trajectory.hpp"

namespace ringdown::solver {

struct FigureValue {
  double value = 0;    // in SI; fractions (overshoot 0.1 = 10 %) stay fractions
  Unit unit;           // FigureCall::unit when the parser set it, else derived (see below)
  std::string note;    // e.g. "does not ring", a jump seen by slope(); empty when none
  bool ok = true;      // false: `error` says why and `value` is meaningless
  std::string error;   // names the figure and the signal, e.g. "rise(out): step = 0 ..."
};

// Evaluates `call` on `trajectory`.
//  - signal_index: index in the trajectory of call.signal (every figure but energy/power).
//  - power_signals: for energy(X) and power(X), the indices of X.v and X.i (energy is the
//    integral of X.v * X.i, i.e. of X.p, computed from the two factors so that the
//    integrand's derivative is exact too); ignored by other figures.
// Window: call.args "from" and "to" (defaults: trajectory.start() and end()). Other args
// (NETLIST.md names): "t" (at), "lo"/"hi" (rise, default 0.1/0.9), "band" (settle, default
// 0.02), "level"/"nth" (when, nth default 1) and call.edge ("up", "down", "any").
// Unit when call.unit is empty: the signal's unit for max min peak pp final at mean rms;
// s for tmax tmin rise settle when; signal unit * s for integral, / s for slope; J, W for
// energy, power; Hz for ringfreq; dimensionless for overshoot undershoot damping.
// The scans of one trajectory (the nodes, extrema and jumps of a signal over a window, what
// every figure but the integrals and at/final is read from), kept for later figures of the
// same signal and window: a file's `report os = overshoot(out)` and `expect overshoot(out)
// < 10%` then scan `out` once. Only for figures on one trajectory, which must outlive it;
// not shared between threads.
class ScanMemo {
 public:
  ScanMemo();
  ~ScanMemo();
  ScanMemo(const ScanMemo&) = delete;
  ScanMemo& operator=(const ScanMemo&) = delete;
  struct Impl;
  std::unique_ptr<Impl> impl;
};

FigureValue evaluate_figure(const FigureCall& call, const Trajectory& trajectory,
                            std::size_t signal_index,
                            std::optional<std::pair<std::size_t, std::size_t>> power_signals,
                            ScanMemo* memo = nullptr);

// True when `value` satisfies the expect: < <= > >= against expect.value, or for `=`,
// abs(value - expect.value) <= TOL, TOL = within * abs(expect.value) when within_relative
// (the parser stores 5% as 0.05), else within (absolute, in the value's unit). A missing
// `within` on `=` means exact equality; NaN never holds.
bool expect_holds(const Expect& expect, double value);

}  // namespace ringdown::solver
