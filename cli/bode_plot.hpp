// The Bode plot of `ringdown freq --plot`: magnitude (dB) in a panel over
// phase (degrees), one curve per recorded signal on a logarithmic frequency
// axis whose ticks carry SI prefixes (100, 1k, 10k, 100k, 1M), the legend
// from the record names with the input source as its title, the circuit's
// title on top. Drawn through gnuplot.hpp (terminal, PNG, SVG or PDF).
//
// Not here: the analysis (solver/frequency.hpp) or any figure read off the
// curves; points where the response is exactly zero (-inf dB) are gaps.
#pragma once

#include <string>

#include "cli/gnuplot.hpp"
#include "solver/frequency.hpp"

namespace ringdown::cli {

struct BodeRequest {
  PlotTarget target;
  std::string title;        // the circuit's title (or file name)
  std::string input;        // the input source's name
  double from = 0, to = 0;  // the sweep's ends, Hz: the frequency axis
};

// Labelled and unlabelled ticks of a logarithmic axis over [low, high]:
// decades when the range holds two or more, else 1-2-5 steps, else every
// digit; `labelled` are the values that carry a label, `minor` the rest of
// the 1..9 multiples inside the range.
struct LogTicks {
  std::vector<double> labelled;
  std::vector<double> minor;
};
LogTicks log_ticks(double low, double high);

// Draws the plot; false with `error` set when gnuplot fails (the target is
// then untouched).
bool draw_bode(const BodeRequest& request, const solver::FrequencyResult& result,
               std::string& error);

}  // namespace ringdown::cli
