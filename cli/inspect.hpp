// `ringdown inspect FILE`: the elaborated circuit as ringdown sees it, for a
// user checking that the file says what they meant: title; nodes (hidden
// internal nodes marked); parts with kind, nodes, value in SI and attributes,
// their hidden parts (esr, esl, dcr, rpar, srf) listed under them; waveforms
// with their corner times; couplings; parameters with units; the analyses,
// records, reports and expects requested; the energy-storing elements; then
// the load warnings (on stderr). Nothing is simulated.
#pragma once

#include <string>

namespace CLI {
class App;
}

namespace ringdown::cli {

struct InspectOptions {
  std::string file;  // the circuit file
};

CLI::App* setup_inspect(CLI::App& app, InspectOptions& options);
int run_inspect(const InspectOptions& options);

}  // namespace ringdown::cli
