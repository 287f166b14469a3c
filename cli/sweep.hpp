// Sweeps and trials (NETLIST.md section 7, "Sweeps and trials"; issue 6): the runner that
// `run` and `check` hand a file to when it has `sweep` or `trials` statements, or when a
// `--set NAME=LIST` gives a list.
//
// A sweep point is the file elaborated again with each swept parameter overridden by its value
// (the same path as `--set NAME=VALUE`, so units and dependent parameters are recomputed
// exactly as there) through the context's Loader; `run` and `check` give one that read and
// parsed the file once (cli::parse_once), so a point is not parsed again. A trial is its point's circuit with each toleranced part's main
// element scaled by a draw of solver/draws.hpp. Points are loaded in parallel, then every
// (point, trial) runs in parallel over --jobs threads; each result is stored at its index,
// so every output is identical to a serial run's whatever the thread count. Under mpirun
// (RINGDOWN_MPI) the jobs are also dealt to the ranks and gathered on rank 0
// (cli/distribute.hpp), with the same outputs.
//
// Outputs: the table on stdout (points: swept values, reports, verdicts; trials: min, mean,
// max, sigma of each report and the yield with its Wilson 95 % interval), `--csv` (the
// table), `--csv-signals` (a column per point and signal), `--best`, `--plot` (signals
// overlaid across points), `--histogram` (trials: cli/histogram_plot.hpp), `--json`, the
// JUnit cases of `check`. Layouts: docs/commands.md.
//
// Not here: the engine (solver/), the draws (solver/draws.hpp), parsing lists (parser/).
#pragma once

#include <cstddef>
#include <functional>
#include <nlohmann/json.hpp>
#include <optional>
#include <string>
#include <vector>

#include "cli/evaluation.hpp"
#include "cli/plot.hpp"
#include "cli/report.hpp"
#include "cli/run.hpp"
#include "parser/circuit.hpp"
#include "parser/load.hpp"

namespace ringdown::cli {

// True when the file (as loaded) needs the sweep runner.
bool needs_sweep_runner(const Circuit& circuit, const LoadOptions& load_options);

struct SweepContext {
  const RunOptions* options = nullptr;
  const Loader* load = nullptr;
  LoadOptions load_options;     // the base load (scalar --set values, --record)
  const Circuit* base = nullptr;
  double until = 0, every = 0;
  bool initial_dc = true;
  SafetyOptions safety;
  double formula_tolerance = 1e-9;
  std::optional<PlotTarget> plot;
  bool check = false;           // `check`: quiet, gate on the verdicts
  Diagnostics warnings;         // load warnings of the base circuit
  std::optional<PlotTarget> histogram;  // --histogram: trials (cli/histogram_plot.hpp)
};

struct SweepOutcome {
  int exit_code = 0;
  int failed_expects = 0;
  nlohmann::json json;
  JUnitSuite junit;
};

SweepOutcome run_sweep(const SweepContext& context);

// The number of worker threads for --jobs N (0: every core the machine reports).
unsigned resolve_jobs(int requested);

}  // namespace ringdown::cli
