// See bode_plot.hpp. Two panels stacked over one logarithmic frequency axis
// (gnuplot.hpp, stack_panels); the tick list is written out explicitly, so
// the labels carry SI prefixes and the minor ticks fall on 2..9 x 10^k.
#include "cli/bode_plot.hpp"

#include <algorithm>
#include <cmath>
#include <functional>
#include <iterator>
#include <limits>
#include <sstream>
#include <utility>
#include <vector>

namespace ringdown::cli {

namespace {

// Image: 1000 x 720 px, the magnitude panel a little taller than the phase
// panel (it carries more of the reading; common practice, no source).
constexpr ImageSize kImage{1000, 720};
constexpr double kMagnitudeWeight = 1.25, kPhaseWeight = 1.0;
// A key outside the plot on the right: its sample line and padding, in characters.
constexpr int kKeySampleChars = 12;
// Rounding slack when a tick sits on a sweep end (1e-9 relative, as
// frequency_points does for its last point).
constexpr double kEndSlack = 1e-9;
// Tick steps: whole fractions of a turn for the phase, and for the gain the
// usual 10/20/40 dB grid with its finer and coarser kin (common practice, no
// source). Ticks an image panel aims at: about gnuplot's own density, fewer
// for the phase so they stay on 45 or 90 degrees.
constexpr double kDegreeSteps[] = {1, 2, 5, 10, 15, 30, 45, 90, 180, 360, 720, 1440};
constexpr double kDecibelSteps[] = {1, 2, 3, 5, 10, 20, 40, 60, 100, 200, 400, 1000};
constexpr double kImageDecibelTicks = 7, kImageDegreeTicks = 5;

double step_from(const double* steps, std::size_t count, double raw) {
  for (std::size_t i = 0; i < count; ++i)
    if (steps[i] >= raw) return steps[i];
  return nice_step(raw);
}
double degree_step(double raw) { return step_from(kDegreeSteps, std::size(kDegreeSteps), raw); }
double decibel_step(double raw) { return step_from(kDecibelSteps, std::size(kDecibelSteps), raw); }

// The explicit tic list: labelled ticks, then the minor ones (level 1).
std::string xtics_command(const LogTicks& ticks, bool labels, bool text, int plot_columns) {
  // A text plot labels every k-th tick when the labels would touch.
  std::size_t every = 1;
  if (text && labels) {
    const std::size_t fit = static_cast<std::size_t>(std::max(plot_columns / kTextTickColumns, 2));
    every = (ticks.labelled.size() + fit - 1) / fit;
  }
  std::ostringstream gp;
  gp.precision(12);
  gp << "set xtics (";
  for (std::size_t i = 0; i < ticks.labelled.size(); ++i) {
    const std::string label =
        labels && i % every == 0 ? si_tick_label(ticks.labelled[i], text) : "";
    gp << (i ? ", " : "") << gnuplot_quoted(label) << " " << ticks.labelled[i];
  }
  for (double v : ticks.minor) gp << ", '' " << v << " 1";
  gp << ")\n";
  return gp.str();
}

std::vector<std::pair<double, double>> curve(const std::vector<double>& x,
                                             const std::vector<double>& y) {
  std::vector<std::pair<double, double>> points(x.size());
  for (std::size_t i = 0; i < x.size(); ++i) points[i] = {x[i], i < y.size() ? y[i] : std::nan("")};
  return points;
}

std::string script(const BodeRequest& request, const solver::FrequencyResult& r,
                   const TerminalSize& size) {
  const bool text = request.target.text();
  const std::vector<PanelFrame> frames =
      stack_panels({kMagnitudeWeight, kPhaseWeight}, text, size.lines, kImage.height);
  const LogTicks ticks = log_ticks(request.from, request.to);
  std::size_t longest = 0;
  std::vector<std::string> names;
  for (const solver::SignalResponse& s : r.signals) {
    names.push_back(s.name);
    longest = std::max(longest, s.name.size());
  }
  const int right_margin = text ? 2 : static_cast<int>(longest) + kKeySampleChars;
  const int left_margin = text ? kTextLeftMargin : kImageLeftMargin;

  // Phase is undefined where the gain is exactly zero.
  std::vector<std::vector<double>> phase(r.signals.size());
  double db_low = std::numeric_limits<double>::infinity(), db_high = -db_low;
  double deg_low = db_low, deg_high = -db_low;
  for (std::size_t k = 0; k < r.signals.size(); ++k) {
    const solver::SignalResponse& s = r.signals[k];
    phase[k] = s.deg;
    for (std::size_t i = 0; i < s.db.size() && i < phase[k].size(); ++i) {
      if (!std::isfinite(s.db[i])) {
        phase[k][i] = std::nan("");
        continue;
      }
      db_low = std::min(db_low, s.db[i]), db_high = std::max(db_high, s.db[i]);
      deg_low = std::min(deg_low, phase[k][i]), deg_high = std::max(deg_high, phase[k][i]);
    }
  }

  std::ostringstream gp;
  gp.precision(12);
  gp << page_commands(request.title, text, size.columns);
  gp << "set logscale x 10\nset xrange [" << request.from << ":" << request.to << "]\n";
  gp << "set lmargin " << left_margin << "\nset rmargin " << right_margin << "\n";
  if (!text) {
    gp << "set style line 100 lc rgb '#c8c8c8' lw 1\nset style line 101 lc rgb '#ebebeb' lw 1\n"
          "set grid xtics mxtics ytics ls 100, ls 101\n";
  }
  const int plot_columns = size.columns - left_margin - right_margin;
  const std::string db_label = "magnitude (dB)";
  const std::string deg_label = "phase (deg)";
  const std::string key_title = "input " + request.input;

  for (int panel = 0; panel < 2; ++panel) {
    const bool magnitude = panel == 0;
    const PanelFrame& frame = frames[static_cast<std::size_t>(panel)];
    gp << panel_commands(frame, "frequency (Hz)");
    gp << xtics_command(ticks, frame.lowest, text, plot_columns);
    const double low = magnitude ? db_low : deg_low, high = magnitude ? db_high : deg_high;
    const auto step = magnitude ? std::function<double(double)>(decibel_step)
                                : std::function<double(double)>(degree_step);
    if (text) {
      gp << text_y_axis(low, high, frame.data_rows, step);
      const std::string header =
          magnitude ? text_panel_header(db_label + ", " + key_title, names, plot_columns - 2)
                    : deg_label;
      gp << "set label 1 " << gnuplot_quoted(header)
         << " at graph 0, graph 1 left front offset 1,0\n";
      gp << "unset key\n";
    } else {
      gp << "set ylabel " << gnuplot_quoted(magnitude ? db_label : deg_label) << "\n";
      if (std::isfinite(low) && high > low)
        gp << "set ytics "
           << step((high - low) / (magnitude ? kImageDecibelTicks : kImageDegreeTicks)) << "\n";
      else
        gp << "set ytics autofreq\n";
      if (magnitude)
        gp << "set key outside right top Left reverse title " << gnuplot_quoted(key_title) << "\n";
      else
        gp << "unset key\n";
    }
    gp << "plot ";
    for (std::size_t k = 0; k < r.signals.size(); ++k) {
      gp << (k ? ", " : "") << "'-' using 1:2 with lines lt " << k + 1 << " lw " << (text ? 1 : 1.5)
         << " title " << gnuplot_quoted(r.signals[k].name);
    }
    if (r.signals.empty()) gp << "NaN notitle";
    gp << "\n";
    for (std::size_t k = 0; k < r.signals.size(); ++k)
      append_points(gp, curve(r.freq, magnitude ? r.signals[k].db : phase[k]));
  }
  gp << "unset multiplot\n";
  return gp.str();
}

}  // namespace

LogTicks log_ticks(double low, double high) {
  LogTicks ticks;
  if (!(low > 0) || !(high > low) || !std::isfinite(high)) return ticks;
  const int first = static_cast<int>(std::floor(std::log10(low)));
  const int last = static_cast<int>(std::ceil(std::log10(high)));
  const auto inside = [&](double v) {
    return v >= low * (1 - kEndSlack) && v <= high * (1 + kEndSlack);
  };
  const std::vector<std::vector<int>> candidates = {{1}, {1, 2, 5}, {1, 2, 3, 4, 5, 6, 7, 8, 9}};
  for (const std::vector<int>& labelled : candidates) {
    ticks = {};
    for (int k = first; k <= last; ++k) {
      const double decade = std::pow(10.0, k);
      for (int m = 1; m <= 9; ++m) {
        const double v = m * decade;
        if (!inside(v)) continue;
        const bool label = std::find(labelled.begin(), labelled.end(), m) != labelled.end();
        (label ? ticks.labelled : ticks.minor).push_back(v);
      }
    }
    if (ticks.labelled.size() >= 2) return ticks;
  }
  // Less than one digit step wide: the two ends.
  ticks.labelled = {low, high};
  ticks.minor.clear();
  return ticks;
}

bool draw_bode(const BodeRequest& request, const solver::FrequencyResult& result,
               std::string& error) {
  if (result.freq.empty() || !(request.from > 0) || !(request.to > request.from)) {
    error = "--plot: the sweep has no frequency range to plot";
    return false;
  }
  return render_figure(
      request.target, kImage,
      [&](const TerminalSize& size) { return script(request, result, size); }, error);
}

}  // namespace ringdown::cli
