// Transient analysis: the public entry of the exact engine.
//
// Circuit -> mna::Network -> index-1 state space -> exact (Duhamel)
// propagation between corners -> samples at t = k*every, streamed to a sink.
// See ARCHITECTURE.md "Exact propagation" and STIFF.md.
#pragma once

#include <cstddef>
#include <functional>
#include <memory>
#include <optional>
#include <string>
#include <vector>

#include "parser/circuit.hpp"
#include "parser/diagnostic.hpp"
#include "solver/trajectory.hpp"

namespace ringdown::mna {
class Network;
}

namespace ringdown::solver {

struct TransientOptions {
  double until = 0;         // end of the run, s (> 0)
  double every = 0;         // output step H, s (> 0); N = round(until/every) per NETLIST.md
  bool initial_dc = true;   // false: initial=zero
  bool strict = false;      // topology warnings become errors
  // Keep the exact solution for figures (report/expect, rated=, safety): the summary's
  // `trajectory` then answers any signal at any instant (ARCHITECTURE.md "Dense output").
  bool dense_output = false;
  // Signals the trajectory holds besides the streamed ones (figure arguments that are not
  // recorded, X.v and X.i of energy(X), node voltages for the safety screen). They are not
  // sent to the sink; in the trajectory they follow the streamed signals, in this order.
  std::vector<Signal> trajectory_signals;
  // formula() sources: target of the estimated fit error, relative to each source's peak
  // (CLI --tol).
  double formula_tolerance = 1e-9;
  // Called now and then with the fraction done (0..1); may be empty.
  std::function<void(double fraction)> progress;
  // The MNA structure (topology checks, unknown layout) of a circuit with the same structure
  // as this one, analysed once: the engine then only stamps this circuit's values into it.
  // The sweep runner hands each trial its point's structure (a trial scales values only).
  // Empty: the engine analyses the circuit itself. The topology diagnostics are those of the
  // analysis, so the caller reports them (the engine adds none from a kept structure).
  std::shared_ptr<const mna::Network> structure;
};

// One output sample: t and the value of every requested signal, in order.
// Called in increasing t; `values` is valid only during the call.
using SampleSink = std::function<void(double t, const double* values, std::size_t count)>;

enum class Status {
  Ok,
  BadInput,   // topology or circuit problem: exit 2
  Numerical,  // could not compute reliably (singular, non-finite): exit 3
};

struct OperatingPointEntry {
  std::string name;  // "drain", "L1.il", "V1.i"
  double value = 0;
  Unit unit;
};

struct TransientSummary {
  Status status = Status::Ok;
  std::vector<OperatingPointEntry> operating_point;  // state at t = 0 (after v0/i0 holds)
  std::size_t samples = 0;           // rows delivered to the sink
  std::size_t states = 0;            // size of the reduced state
  std::size_t segments = 0;          // intervals between corners / switch events
  std::size_t switch_events = 0;
  std::size_t propagators_built = 0; // dense expm evaluations (cache misses)
  std::size_t sparse_propagators = 0; // of those, kept truncated sparse (propagation.hpp)
  double seconds = 0;                // wall time of the engine
  // With options.dense_output and status Ok: the exact solution, signals indexed as the
  // streamed ones followed by options.trajectory_signals. Holds what it needs (it outlives
  // the engine and the circuit).
  std::shared_ptr<const Trajectory> trajectory;
  // formula() sources: the largest estimated fit error, relative to the source's peak
  // (0 when the circuit has none).
  double formula_error = 0;
};

// Runs the circuit's transient analysis for `signals` (usually circuit.records).
// Warnings and errors are appended to `diagnostics` (nothing is printed).
TransientSummary run_transient(const Circuit& circuit, const std::vector<Signal>& signals,
                               const TransientOptions& options, const SampleSink& sink,
                               Diagnostics& diagnostics);

// Convenience for tests and figures: keeps every sample in memory.
struct SampledRun {
  TransientSummary summary;
  std::vector<double> time;
  std::vector<std::vector<double>> values;  // values[signal][sample]
};
SampledRun run_transient_sampled(const Circuit& circuit, const std::vector<Signal>& signals,
                                 const TransientOptions& options, Diagnostics& diagnostics);

}  // namespace ringdown::solver
