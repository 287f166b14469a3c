// Transient analysis: the public entry of the exact engine.
//
// Circuit -> mna::Network -> index-1 state space -> exact (Duhamel)
// propagation between corners -> samples at t = k*every, streamed to a sink.
// See ARCHITECTURE.md "Exact propagation" and STIFF.md.
#pragma once

#include <cstddef>
#include <functional>
#include <optional>
#include <string>
#include <vector>

#include "parser/circuit.hpp"
#include "parser/diagnostic.hpp"

namespace ringdown::solver {

struct TransientOptions {
  double until = 0;         // end of the run, s (> 0)
  double every = 0;         // output step H, s (> 0); N = round(until/every) per NETLIST.md
  bool initial_dc = true;   // false: initial=zero
  bool strict = false;      // topology warnings become errors
  // Called now and then with the fraction done (0..1); may be empty.
  std::function<void(double fraction)> progress;
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
  double seconds = 0;                // wall time of the engine
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
