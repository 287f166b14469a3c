// See histogram_plot.hpp. Bars are drawn from inline data (boxes at the bin centres), so a
// text plot and an image show the same counts.
#include "cli/histogram_plot.hpp"

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <limits>
#include <sstream>

namespace ringdown::cli {

namespace {

constexpr std::size_t kMinBins = 5, kMaxBins = 40;
// Image: a title band, then one panel per report with room under it for its x labels.
constexpr int kImageWidthPx = 1000;
constexpr int kTitlePx = 50;
constexpr int kPanelPx = 300;
constexpr int kAxisPx = 60;  // x tick labels and x label under each panel
// Text plot: rows under each panel for its tick labels and x label.
constexpr int kTextAxisRows = 2;

std::string number(double v) {
  char buffer[64];
  std::snprintf(buffer, sizeof buffer, "%.10g", v);
  return buffer;
}

}  // namespace

std::vector<double> histogram_edges(const std::vector<std::vector<double>>& values) {
  double low = std::numeric_limits<double>::infinity(), high = -low;
  std::size_t n = 0;
  for (const auto& v : values) {
    for (double x : v)
      if (std::isfinite(x)) low = std::min(low, x), high = std::max(high, x), ++n;
  }
  if (n == 0) return {};
  if (!(high > low)) {
    const double half = low != 0 ? 0.005 * std::fabs(low) : 0.5;
    return {low - half, low + half};
  }
  std::size_t per_point = 0;
  for (const auto& v : values) per_point = std::max(per_point, v.size());
  const auto bins = std::clamp<std::size_t>(
      static_cast<std::size_t>(std::ceil(std::sqrt(static_cast<double>(per_point)))), kMinBins, kMaxBins);
  std::vector<double> edges(bins + 1);
  for (std::size_t b = 0; b <= bins; ++b)
    edges[b] = low + (high - low) * static_cast<double>(b) / static_cast<double>(bins);
  edges.back() = high;
  return edges;
}

std::vector<long> histogram_counts(const std::vector<double>& values, const std::vector<double>& edges) {
  if (edges.size() < 2) return {};
  const std::size_t bins = edges.size() - 1;
  std::vector<long> counts(bins, 0);
  const double low = edges.front(), width = (edges.back() - low) / static_cast<double>(bins);
  for (double x : values) {
    if (!std::isfinite(x) || x < low || x > edges.back()) continue;
    auto b = static_cast<std::size_t>(std::floor((x - low) / width));
    counts[std::min(b, bins - 1)]++;
  }
  return counts;
}

bool draw_histograms(const HistogramRequest& request, std::string& error) {
  const int n = static_cast<int>(std::max<std::size_t>(request.panels.size(), 1));
  const ImageSize image{kImageWidthPx, kTitlePx + n * (kPanelPx + kAxisPx)};
  const auto body = [&](const TerminalSize& size) {
    const bool text = request.target.text();
    std::ostringstream gp;
    gp << page_commands(request.title, text, size.columns);
    gp << "set style fill " << (text ? "empty" : "transparent solid 0.45 border") << "\n";
    gp << (text ? "unset ylabel\n" : "set ylabel 'trials'\n") << "set yrange [0:*]\nset offsets 0, 0, graph 0.1, 0\n";
    // Panel frames in screen fractions: a title band, then equal slots.
    const double title = text ? 2.0 / size.lines : static_cast<double>(kTitlePx) / image.height;
    const double axis = text ? static_cast<double>(kTextAxisRows + 1) / size.lines
                             : static_cast<double>(kAxisPx) / image.height;
    const double slot = (1.0 - title) / n;
    if (request.panels.empty()) gp << "set label 1 'no report to plot' at graph 0.5,0.5 center\nplot NaN notitle\n";
    const bool key = request.point_labels.size() > 1;
    gp << (key ? "set key top right\n" : "unset key\n");
    for (std::size_t p = 0; p < request.panels.size(); ++p) {
      const HistogramPanel& panel = request.panels[p];
      const double top = 1.0 - title - slot * static_cast<double>(p);
      gp << "set tmargin at screen " << top << "\nset bmargin at screen " << top - slot + axis << "\n";
      gp << "set lmargin " << (text ? kTextLeftMargin : kImageLeftMargin) << "\nset rmargin 3\n";
      const std::vector<double> edges = histogram_edges(panel.values);
      double peak = 0;
      for (double e : edges) peak = std::max(peak, std::fabs(e));
      if (panel.limit) peak = std::max(peak, std::fabs(*panel.limit));
      const std::string symbol = panel.unit ? unit_symbol(*panel.unit) : "";
      const Scale x = symbol.empty() ? Scale{} : si_scale(peak, text);
      const std::string unit = x.prefix + symbol;
      gp << "set xlabel " << gnuplot_quoted(panel.name + " = " + panel.figure + (unit.empty() ? "" : " (" + unit + ")")) << "\n";
      gp << "unset arrow\nunset label\n";
      // The text terminal drops a rotated y label: the label goes in the top border instead.
      if (text) gp << "set label 3 'trials' at graph 0, graph 1 left front offset 1,0\n";
      if (edges.empty()) {
        gp << "set xrange [*:*]\nset label 1 " << gnuplot_quoted("no trial has a value for " + panel.name)
           << " at graph 0.5,0.5 center\nplot NaN notitle\n";
        continue;
      }
      double lo = edges.front(), hi = edges.back();
      if (panel.limit) lo = std::min(lo, *panel.limit), hi = std::max(hi, *panel.limit);
      const double pad = 0.05 * (hi - lo);
      gp << "set xrange [" << number((lo - pad) / x.factor) << ":" << number((hi + pad) / x.factor) << "]\n";
      if (panel.limit) {
        const double at = *panel.limit / x.factor;
        // A text plot rounds graph 1 up to the row above the border: stop just below it.
        gp << "set arrow 1 from " << number(at) << ", graph 0 to " << number(at) << ", graph " << (text ? "0.97" : "1") << " nohead "
           << (text ? "lt 0" : "lw 2 dt 2 lc rgb '#c00000'") << " front\n";
        // The label on the side of the line with more room.
        const bool right_half = *panel.limit > 0.5 * (lo + hi);
        gp << "set label 2 " << gnuplot_quoted("limit " + panel.limit_label) << " at " << number(at) << ", graph 0.92 "
           << (right_half ? "right offset -1,0" : "left offset 1,0") << (text ? "" : " tc rgb '#c00000'") << " front\n";
      }
      const double width = (edges.back() - edges.front()) / static_cast<double>(edges.size() - 1) / x.factor;
      gp << "set boxwidth " << number(width) << " absolute\n";
      gp << "plot ";
      for (std::size_t k = 0; k < panel.values.size(); ++k)
        gp << (k ? ", " : "") << "'-' using 1:2 with boxes lt " << k + 1 << " title "
           << gnuplot_quoted(k < request.point_labels.size() ? request.point_labels[k] : "");
      gp << "\n";
      for (const auto& v : panel.values) {
        const std::vector<long> counts = histogram_counts(v, edges);
        std::vector<std::pair<double, double>> bars;
        for (std::size_t b = 0; b < counts.size(); ++b)
          bars.emplace_back(0.5 * (edges[b] + edges[b + 1]), static_cast<double>(counts[b]));
        append_points(gp, bars, x.factor, 1);
      }
    }
    gp << "unset multiplot\n";
    return gp.str();
  };
  return render_figure(request.target, image, body, error);
}

}  // namespace ringdown::cli
