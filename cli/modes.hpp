// `ringdown modes FILE`: the natural modes table of a circuit (CLI.md;
// NETLIST.md section 7, `modes`): for each switch configuration the
// transient run meets, one row per real pole or complex pair, sorted by
// frequency, with the damped and undamped natural frequency, damping ratio,
// Q, time constant and the parts that take part most. The computation is
// solver/modes.hpp; this file only loads, prints and maps outcomes onto the
// exit codes (0 ok, 2 bad input, 3 numerical failure).
//
// On request (--plot term|PATH.png|.svg|.pdf) the pole map of
// pole_plot.hpp, after the table.
//
// Not here: sweeps and trials (modes are for the nominal values, after --set).
#pragma once

#include <string>
#include <vector>

#include "solver/modes.hpp"

namespace CLI {
class App;
}

namespace ringdown::cli {

struct ModesOptions {
  std::string file;              // the circuit file
  std::vector<std::string> set;  // --set NAME=VALUE, in order
  std::string plot;              // --plot term|PATH.png|PATH.svg|PATH.pdf
  bool strict = false;           // --strict: warnings are errors (exit 2)
};

CLI::App* setup_modes(CLI::App& app, ModesOptions& options);
int run_modes(const ModesOptions& options);

// The table for one circuit's result, as printed on stdout (for tests).
std::string format_modes(const Circuit& circuit, const solver::ModesResult& result);

}  // namespace ringdown::cli
