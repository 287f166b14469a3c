// The exact solution of a run, as the figures see it.
//
// A Trajectory answers "what is signal k, and its time derivative, at any instant t" on the
// exact (Duhamel) solution, not only on the output grid, so that figures (figures.hpp) can
// locate peaks, crossings, rise and settling instants between samples and integrate to
// 1e-9 relative. The exact engine implements it (ARCHITECTURE.md "Dense output"); tests
// implement it with closed forms. This header holds only the interface: no engine code,
// no sampling, no storage.
#pragma once

#include <cmath>
#include <cstddef>
#include <limits>
#include <vector>

namespace ringdown::solver {

class Trajectory {
 public:
  virtual ~Trajectory() = default;

  // The run's span [start, end] (start is 0 for a transient run).
  virtual double start() const = 0;
  virtual double end() const = 0;

  // Instants inside (start, end) where the solution's formula changes (source corners,
  // switch events), sorted increasing. Between two consecutive corners every signal is
  // smooth (analytic), which is what the root finders and the quadrature rely on. A signal
  // may jump at a corner (a source step seen directly).
  virtual std::vector<double> corners() const = 0;

  // The output grid t = k * every, sorted increasing, start and end included.
  virtual std::vector<double> sample_times() const = 0;

  // Exact value of signal `signal` (index into the signals the run was asked for) and of
  // its time derivative at any t in [start, end]; at a corner, the right limit.
  virtual double value(std::size_t signal, double t) const = 0;
  virtual double derivative(std::size_t signal, double t) const = 0;

  // Every signals[i] (i < count) at every output sample (sample_times(), S of them): the
  // value into values[i * S + k] and, when `derivatives` is not null, the derivative into
  // derivatives[i * S + k]. The same numbers value() and derivative() give at those instants
  // (the figures' scans and the safety screen read every sample); an engine that keeps the
  // state at each sample may answer in one pass instead of S lookups.
  virtual void at_samples(const std::size_t* signals, std::size_t count, double* values,
                          double* derivatives) const {
    const std::vector<double> times = sample_times();
    const std::size_t n = times.size();
    for (std::size_t i = 0; i < count; ++i)
      for (std::size_t k = 0; k < n; ++k) {
        values[i * n + k] = value(signals[i], times[k]);
        if (derivatives) derivatives[i * n + k] = derivative(signals[i], times[k]);
      }
  }

  // Left limits at a corner. The default evaluates one ulp before t, where the previous
  // segment's formula applies: exact to rounding for a formula that is smooth up to t.
  // An engine that stores the state just before each corner may override these.
  virtual double value_before(std::size_t signal, double t) const {
    return value(signal, std::nextafter(t, -std::numeric_limits<double>::infinity()));
  }
  virtual double derivative_before(std::size_t signal, double t) const {
    return derivative(signal, std::nextafter(t, -std::numeric_limits<double>::infinity()));
  }

  // Largest spacing the figures may use when bracketing extrema and crossings, s. The
  // output grid may be coarser than the ringing it records (NETLIST.md warns, "figures stay
  // exact"), so the engine should return a fraction (say a tenth) of the period of the
  // fastest oscillatory mode the signals show. 0: the output grid, refined a few times
  // per interval, is fine enough.
  virtual double bracket_step() const { return 0.0; }
};

}  // namespace ringdown::solver
