// `ringdown run FILE` and `ringdown check FILE...`: the transient analysis of a
// circuit file, its figures (report), verdicts (expect), ratings and safety
// screen; `run` prints the summary on stdout and on request writes the
// recorded signals as CSV (--csv), a plot (--plot) and the summary as JSON
// (--json); `check` is quiet unless something fails, exits 1 when an expect
// fails and writes JUnit XML (--junit). CLI.md names the flags. A file with
// sweeps or trials goes to the runner of cli/sweep.hpp.
#pragma once

#include <functional>
#include <memory>
#include <nlohmann/json.hpp>
#include <string>
#include <vector>

#include "cli/evaluation.hpp"
#include "parser/load.hpp"
#include "solver/transient.hpp"

namespace CLI {
class App;
}

namespace ringdown::cli {

struct RunOptions {
  std::string file;                 // the circuit file
  std::vector<std::string> set;     // --set NAME=VALUE, in order
  std::string until;                // --until T (as typed, e.g. "2m")
  std::string every;                // --every H
  std::vector<std::string> record;  // --record S,S,... (each occurrence; joined)
  std::string csv;                  // --csv PATH, "-" for stdout
  int digits = 12;                  // --digits N: significant digits in the CSV
  std::string plot;                 // --plot term|PATH.png|PATH.svg|PATH.pdf
  bool quiet = false;               // --quiet: no summary, no progress
  bool no_progress = false;         // --no-progress
  bool strict = false;              // --strict: warnings are errors (exit 2)
  std::string json;                 // --json PATH: the summary as JSON
  std::string tol;                  // --tol: formula() fit tolerance (relative), as typed
  std::string elv;                  // --elv AC_RMS,DC: the safety band, as typed
  bool accept_mains_risk = false;   // --accept-mains-risk
  int jobs = 0;                     // --jobs N: threads for sweeps and trials (0: every core)
  std::string csv_signals;          // --csv-signals PATH: waveforms of a sweep or trials
  std::string best;                 // --best 'min NAME' | 'max NAME'
  std::string histogram;            // --histogram term|PATH.png|.svg|.pdf: trials, per report
};

CLI::App* setup_run(CLI::App& app, RunOptions& options);
// The flags run shares with check and compare (--set, --until, --every, --record, --json,
// --tol, --elv, --accept-mains-risk, --quiet, --no-progress, --strict).
void add_shared_flags(CLI::App* command, RunOptions& options);
int run_run(const RunOptions& options);

// `ringdown check FILE... [--junit PATH]`: the options of run that make sense for
// several files at once.
struct CheckOptions {
  std::vector<std::string> files;
  RunOptions run;      // file, csv, plot unused
  std::string junit;   // --junit PATH
};
CLI::App* setup_check(CLI::App& app, CheckOptions& options);
int run_check(const CheckOptions& options);

// The body of `run` for a circuit from anywhere (a file, or the demo's text):
// `load` reads and elaborates it with the given options. It is called once for the
// circuit, then once per sweep point, from several threads at once (cli/sweep.hpp).
using Loader = std::function<LoadResult(const LoadOptions&)>;
int run_loaded(const RunOptions& options, const Loader& load);

// A Loader that calls `parse` once, at its first call, and elaborates every call from that
// one ParsedSource (parser/load.hpp): the circuit and its sweep points are read and parsed
// once, and each point only elaborated with its --set values. Results are identical to
// load_file / load_text on every call. Safe to call from several threads at once.
Loader parse_once(std::function<std::shared_ptr<const ParsedSource>()> parse);

// One file run for commands built on run (compare): the circuit, the summary with the exact
// trajectory, the figures, and the recorded signals at the samples. Warnings, errors and the
// mains caution are printed; exit_code is kExitOk when everything could be computed.
struct SimulatedFile {
  int exit_code = 0;
  std::unique_ptr<LoadResult> loaded;  // stable address: plan and evaluation point into it
  double until = 0, every = 0;
  solver::TransientSummary summary;
  std::unique_ptr<EvaluationPlan> plan;
  Evaluation evaluation;
  std::vector<double> time;
  std::vector<std::vector<double>> values;  // per recorded signal, at `time`
};
SimulatedFile simulate_file(const RunOptions& options);

// Writes `j` (2-space indented) to `path` atomically; false (printed) on failure.
bool write_json_file(const std::string& path, const nlohmann::json& j);

// "a, b(c, d), e" -> {"a", "b(c, d)", "e"}: splits at commas outside
// parentheses and trims blanks (a recorded signal may be an expression).
std::vector<std::string> split_signal_list(const std::string& text);

}  // namespace ringdown::cli
