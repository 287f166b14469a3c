// See plot.hpp. The gnuplot plumbing (terminals, panel stacks, running
// gnuplot into an atomic file) is gnuplot.hpp's; this file lays out the
// transient panels and keeps the decimated samples.
#include "cli/plot.hpp"

#include <algorithm>
#include <cmath>
#include <limits>
#include <sstream>

namespace ringdown::cli {

namespace {

// Image: 1000 px (10 in) wide, 270 px (2.7 in) per panel plus the title and
// the time axis (readable on a laptop screen and in a report; common
// practice, no source).
constexpr int kImageWidthPx = 1000;
constexpr int kPanelHeightPx = 270;
constexpr int kFrameHeightPx = 100;
// Right margin in characters (the left one is gnuplot.hpp's).
constexpr int kRightMargin = 3;

std::string quantity_word(const std::string& symbol) {
  if (symbol == "V") return "voltage";
  if (symbol == "A") return "current";
  if (symbol == "W") return "power";
  if (symbol == "J") return "energy";
  return "value";
}

struct Panel {
  std::string symbol;          // unit symbol; "" for unknown or dimensionless
  std::vector<std::size_t> signals;
};

std::vector<Panel> panels_by_unit(const std::vector<PlotSignal>& signals) {
  std::vector<Panel> panels;
  auto panel_for = [&](const std::string& symbol) -> Panel& {
    for (Panel& p : panels)
      if (p.symbol == symbol) return p;
    panels.push_back({symbol, {}});
    return panels.back();
  };
  // Volts, amperes, watts first (issue 3), then other units in record order.
  for (const char* preferred : {"V", "A", "W"}) {
    for (std::size_t k = 0; k < signals.size(); ++k)
      if (signals[k].unit && unit_symbol(*signals[k].unit) == preferred)
        panel_for(preferred).signals.push_back(k);
  }
  for (std::size_t k = 0; k < signals.size(); ++k) {
    const std::string symbol = signals[k].unit ? unit_symbol(*signals[k].unit) : "";
    if (symbol == "V" || symbol == "A" || symbol == "W") continue;
    panel_for(symbol).signals.push_back(k);
  }
  return panels;
}

// The gnuplot commands after the terminal: one panel per unit, each a `plot`
// with inline data, stacked over the time axis.
std::string script(const PlotRequest& request, const PlotData& data,
                   const TerminalSize& text_size) {
  const bool text = request.target.text();
  const std::vector<Panel> panels = panels_by_unit(data.signals());
  const std::vector<PanelFrame> frames = stack_panels(
      std::vector<double>(std::max<std::size_t>(panels.size(), 1), 1.0), text, text_size.lines,
      kFrameHeightPx + static_cast<int>(std::max<std::size_t>(panels.size(), 1)) * kPanelHeightPx);
  std::ostringstream gp;
  gp.precision(10);
  const Scale t_scale = si_scale(request.t_end, text);
  const std::string t_label = "time (" + t_scale.prefix + "s)";
  gp << page_commands(request.title, text, text_size.columns);
  gp << "set lmargin " << (text ? kTextLeftMargin : kImageLeftMargin) << "\nset rmargin "
     << kRightMargin << "\n";
  if (text)
    gp << "unset key\n";
  else
    gp << "set grid\nset key top right box opaque\n";
  gp << "set xrange [0:" << request.t_end / t_scale.factor << "]\n";
  if (panels.empty()) {
    gp << panel_commands(frames.front(), t_label);
    gp << "set label 1 'nothing recorded' at graph 0.5,0.5 center\nplot NaN notitle\n";
  }
  for (std::size_t p = 0; p < panels.size(); ++p) {
    const Panel& panel = panels[p];
    double low = std::numeric_limits<double>::infinity(), high = -low;
    for (std::size_t k : panel.signals)
      for (const auto& [t, v] : data.points()[k]) low = std::min(low, v), high = std::max(high, v);
    const double peak = std::max(std::fabs(low), std::fabs(high));
    // A dimensionless or unknown unit is shown unscaled: a prefix alone reads oddly.
    const Scale y = panel.symbol.empty() ? Scale{} : si_scale(peak, text);
    const std::string unit = y.prefix + panel.symbol;
    const std::string y_label = quantity_word(panel.symbol) + (unit.empty() ? "" : " (" + unit + ")");
    gp << panel_commands(frames[p], t_label);
    if (text) {
      std::vector<std::string> names;
      for (std::size_t k : panel.signals) names.push_back(data.signals()[k].name);
      gp << text_y_axis(low / y.factor, high / y.factor, frames[p].data_rows);
      gp << "set label 1 "
         << gnuplot_quoted(text_panel_header(
                y_label, names, text_size.columns - kTextLeftMargin - kRightMargin - 2))
         << " at graph 0, graph 1 left front offset 1,0\n";
    } else {
      gp << "set ylabel " << gnuplot_quoted(y_label) << "\n";
    }
    gp << "plot ";
    for (std::size_t i = 0; i < panel.signals.size(); ++i) {
      if (i) gp << ", ";
      gp << "'-' using 1:2 with lines lt " << i + 1 << " lw " << (text ? 1 : 1.5) << " title "
         << gnuplot_quoted(data.signals()[panel.signals[i]].name);
    }
    gp << "\n";
    for (std::size_t k : panel.signals)
      append_points(gp, data.points()[k], t_scale.factor, y.factor);
  }
  gp << "unset multiplot\n";
  return gp.str();
}

}  // namespace

PlotData::PlotData(std::vector<PlotSignal> signals, std::size_t expected_samples)
    : signals_(std::move(signals)),
      points_(signals_.size()),
      bucket_(signals_.size()),
      last_values_(signals_.size()) {
  bucket_size_ = std::max<std::size_t>(1, (expected_samples + kPlotBuckets - 1) / kPlotBuckets);
  for (auto& p : points_) p.reserve(std::min<std::size_t>(expected_samples, 2 * kPlotBuckets + 2));
}

void PlotData::add(double t, const double* values, std::size_t count) {
  count = std::min(count, signals_.size());
  if (!have_last_) {
    // The first sample exactly, so every curve starts at t = 0.
    for (std::size_t k = 0; k < count; ++k) points_[k].emplace_back(t, values[k]);
  }
  for (std::size_t k = 0; k < count; ++k) {
    Extremes& e = bucket_[k];
    if (in_bucket_ == 0 || values[k] < e.v_min) e.t_min = t, e.v_min = values[k];
    if (in_bucket_ == 0 || values[k] > e.v_max) e.t_max = t, e.v_max = values[k];
    last_values_[k] = values[k];
  }
  last_t_ = t;
  have_last_ = true;
  if (++in_bucket_ == bucket_size_) flush_bucket();
}

void PlotData::flush_bucket() {
  if (in_bucket_ == 0) return;
  for (std::size_t k = 0; k < signals_.size(); ++k) {
    const Extremes& e = bucket_[k];
    auto& out = points_[k];
    auto push = [&](double t, double v) {
      if (out.empty() || t > out.back().first) out.emplace_back(t, v);
    };
    if (e.t_min <= e.t_max) push(e.t_min, e.v_min), push(e.t_max, e.v_max);
    else push(e.t_max, e.v_max), push(e.t_min, e.v_min);
  }
  in_bucket_ = 0;
}

void PlotData::finish() {
  flush_bucket();
  if (!have_last_) return;
  // The last sample exactly, so every curve reaches the end of the run.
  for (std::size_t k = 0; k < signals_.size(); ++k) {
    if (points_[k].empty() || points_[k].back().first < last_t_)
      points_[k].emplace_back(last_t_, last_values_[k]);
  }
}

bool draw_plot(const PlotRequest& request, const PlotData& data, std::string& error) {
  const int panels =
      static_cast<int>(std::max<std::size_t>(panels_by_unit(data.signals()).size(), 1));
  const ImageSize image{kImageWidthPx, kFrameHeightPx + panels * kPanelHeightPx};
  return render_figure(
      request.target, image, [&](const TerminalSize& size) { return script(request, data, size); },
      error);
}

}  // namespace ringdown::cli
