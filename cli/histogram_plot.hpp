// `run FILE --histogram term|F.png|F.svg|F.pdf` for a file with `trials`: one panel per
// report, the number of trials in each bin of its value (issue 6: "histogram plot"), through
// the shared gnuplot machinery (gnuplot.hpp: targets, SI-scaled axes, atomic files). With
// several sweep points, each point's histogram is drawn in the panel with its own colour
// over bins common to all points. When an expect checks the same figure as the report, its
// limit is a vertical line labelled with it.
//
// Bins: ceil(sqrt(n)) of them for n trials, at least 5 and at most 40 (the square-root
// choice; common practice, no source), equal widths over the values of every point.
//
// Not here: the statistics and the text histogram of the summary (sweep.cpp).
#pragma once

#include <optional>
#include <string>
#include <vector>

#include "cli/gnuplot.hpp"
#include "parser/units.hpp"

namespace ringdown::cli {

struct HistogramPanel {
  std::string name;    // the report's name
  std::string figure;  // the figure as written, e.g. "when(bus, 60V, edge=down)"
  Unit unit;
  std::vector<std::vector<double>> values;  // per point: the report over its trials (failed ones left out)
  std::optional<double> limit;              // an expect's limit on the same figure
  std::string limit_label;                  // "< 30 s"
};

struct HistogramRequest {
  PlotTarget target;
  std::string title;
  std::vector<std::string> point_labels;  // one per point ("" for a single point)
  std::vector<HistogramPanel> panels;
};

// Bin edges for `values` (every point together): bins + 1 increasing edges; a single
// value gets one bin of width 1 % of it (or 1) around it.
std::vector<double> histogram_edges(const std::vector<std::vector<double>>& values);
// Counts per bin (the last bin includes its upper edge).
std::vector<long> histogram_counts(const std::vector<double>& values, const std::vector<double>& edges);

// Draws the panels; false with `error` set when gnuplot fails (the target is untouched).
bool draw_histograms(const HistogramRequest& request, std::string& error);

}  // namespace ringdown::cli
