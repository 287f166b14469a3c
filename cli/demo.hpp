// `ringdown demo`: runs an example circuit embedded in the binary at build
// time (cli/CMakeLists.txt turns circuits/*snubber*.rlc into a byte array),
// prints its summary and a terminal plot. `--source` prints the circuit text
// instead, so the user can save and edit it.
#pragma once

namespace CLI {
class App;
}

namespace ringdown::cli {

struct DemoOptions {
  bool source = false;       // --source: print the embedded circuit and exit
  bool no_progress = false;  // --no-progress
  bool no_plot = false;      // --no-plot: summary only
};

// True when the build embedded a demo circuit (else the command is not registered).
bool demo_available();
CLI::App* setup_demo(CLI::App& app, DemoOptions& options);
int run_demo(const DemoOptions& options);

}  // namespace ringdown::cli
