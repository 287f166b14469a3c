// `ringdown freq FILE`: the frequency response of a circuit file (CLI.md,
// NETLIST.md section 7 `frequency`) from its input source to each recorded
// signal. Prints a summary (title, input, points, and per signal the figures
// of docs/frequency.md) and on request writes the CSV
// `freq,<signal>.db,<signal>.deg,...` (--csv PATH, '-' for stdout) and the
// Bode plot (--plot term|PATH.png|.svg|.pdf, bode_plot.hpp).
//
// Flags override the file's statement: --input SRC replaces input=, --from,
// --to and --per-decade replace the sweep. Not here: sweeps and trials of
// the frequency analysis.
#pragma once

#include <string>
#include <vector>

namespace CLI {
class App;
}

namespace ringdown::cli {

struct FreqOptions {
  std::string file;                 // the circuit file
  std::string input;                // --input SRC (empty: the file's input=)
  std::string from, to;             // --from F, --to F (as typed, e.g. "10Hz", "1M")
  int per_decade = 0;               // --per-decade N (0: the file's, else 50)
  std::string phase_at;             // --phase-at F: also report the phase there
  std::vector<std::string> set;     // --set NAME=VALUE
  std::vector<std::string> record;  // --record S,S,...
  std::string csv;                  // --csv PATH, "-" for stdout
  std::string plot;                 // --plot term|PATH.png|PATH.svg|PATH.pdf
  int digits = 12;                  // --digits N
  bool quiet = false;               // --quiet: no summary
  bool strict = false;              // --strict: warnings are errors (exit 2)
};

CLI::App* setup_freq(CLI::App& app, FreqOptions& options);
int run_freq(const FreqOptions& options);

}  // namespace ringdown::cli
