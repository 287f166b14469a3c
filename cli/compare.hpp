// `ringdown compare A.rlc B.rlc` and `ringdown compare FILE --measured DATA.csv --map S=COL`
// (CLI.md): two revisions of a circuit, or a circuit and a bench capture, side by side.
//
// Two files: both are run (the flags of run apply to both), their figures are printed side by
// side with the difference B - A and the relative change, their expects with both verdicts,
// and the recorded signals they share are overlaid in one plot (B evaluated on A's output
// instants through its exact trajectory, so the two runs need not share a grid).
// A capture: the file is run, the capture's columns named by --map become signals of a
// piecewise-linear trajectory (solver/sampled_trajectory.hpp), and every report and expect
// whose signal is mapped is computed on both, with the difference; the plot overlays them.
//
// Exit status as run: 0 when both sides could be computed (differences are not failures).
// Not here: aligning a capture's time base automatically (--time-offset shifts it), noise
// filtering.
#pragma once

#include <string>
#include <vector>

#include "cli/run.hpp"

namespace CLI {
class App;
}

namespace ringdown::cli {

struct CompareOptions {
  std::vector<std::string> files;  // one (with --measured) or two
  RunOptions run;                  // shared flags; file unused
  std::string measured;            // --measured DATA.csv
  std::vector<std::string> map;    // --map S=COLUMN,... (each occurrence)
  std::string time_column = "1";   // --time-column: 1-based index or header name
  std::string time_offset;         // --time-offset T: added to the capture's times
  std::string plot;                // --plot term|PATH.png|.svg|.pdf
};

CLI::App* setup_compare(CLI::App& app, CompareOptions& options);
int run_compare(const CompareOptions& options);

}  // namespace ringdown::cli
