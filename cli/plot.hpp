// Plots of recorded signals through gnuplot (gnuplot-iostream, LIBRARIES.md
// section 4): `--plot term` draws a text plot sized to the terminal, `--plot
// FILE.png|.svg|.pdf` writes a file (atomically, see atomic_file.hpp).
//
// Layout: one panel per unit (voltages, currents, powers, then any other
// unit), stacked over one time axis (gnuplot.hpp, stack_panels); the
// circuit's title on top; the legend from the record names; both axes scaled
// to an SI prefix and labelled with it ("time (us)", "current (mA)") so tick
// labels stay short. In a text plot each panel's top border carries its
// label and legend ("voltage (V): * drain").
//
// PlotData keeps what a plot needs while the run streams: at most
// kPlotBuckets buckets per signal, each reduced to its minimum and maximum
// sample (so a narrow spike is never lost by decimation), plus the first and
// last sample exactly. Memory is bounded whatever the run's length.
#pragma once

#include <cstddef>
#include <optional>
#include <string>
#include <utility>
#include <vector>

#include "cli/gnuplot.hpp"  // PlotTarget, parse_plot_target, gnuplot_available
#include "parser/units.hpp"

namespace ringdown::cli {

struct PlotSignal {
  std::string name;  // as written in the record list
  Unit unit;
};

class PlotData {
 public:
  // Buckets per signal: a few per pixel column of a 1000-pixel-wide image.
  static constexpr std::size_t kPlotBuckets = 2000;

  PlotData(std::vector<PlotSignal> signals, std::size_t expected_samples);
  void add(double t, const double* values, std::size_t count);
  void finish();  // flushes the last bucket; call once after the run

  const std::vector<PlotSignal>& signals() const { return signals_; }
  // points()[k]: (t, value) of signal k, in increasing t.
  const std::vector<std::vector<std::pair<double, double>>>& points() const { return points_; }

 private:
  struct Extremes {
    double t_min = 0, v_min = 0, t_max = 0, v_max = 0;
  };
  void flush_bucket();
  std::vector<PlotSignal> signals_;
  std::vector<std::vector<std::pair<double, double>>> points_;
  std::vector<Extremes> bucket_;
  std::size_t bucket_size_ = 1;
  std::size_t in_bucket_ = 0;
  bool have_last_ = false;
  double last_t_ = 0;
  std::vector<double> last_values_;
};

struct PlotRequest {
  PlotTarget target;
  std::string title;   // the circuit's title (or file name)
  double t_end = 0;    // end of the time axis, s
};

// Draws the plot. For Terminal the text goes to stdout. Returns false with
// `error` set when gnuplot fails or the file it wrote is not a valid
// PNG/SVG/PDF (the target is then left untouched).
bool draw_plot(const PlotRequest& request, const PlotData& data, std::string& error);

}  // namespace ringdown::cli
