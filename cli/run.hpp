// `ringdown run FILE`: the transient analysis of a circuit file, its summary
// on stdout, and on request the recorded signals as CSV (--csv) and a plot
// (--plot). CLI.md names the flags; this version runs the transient
// statement only (frequency, modes, sweeps, trials and the figures of
// report/expect come with later issues and are announced as not run).
#pragma once

#include <functional>
#include <string>
#include <vector>

#include "parser/load.hpp"

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
};

CLI::App* setup_run(CLI::App& app, RunOptions& options);
int run_run(const RunOptions& options);

// The body of `run` for a circuit from anywhere (a file, or the demo's text):
// `load` reads and elaborates it with the given options.
using Loader = std::function<LoadResult(const LoadOptions&)>;
int run_loaded(const RunOptions& options, const Loader& load);

// "a, b(c, d), e" -> {"a", "b(c, d)", "e"}: splits at commas outside
// parentheses and trims blanks (a recorded signal may be an expression).
std::vector<std::string> split_signal_list(const std::string& text);

}  // namespace ringdown::cli
