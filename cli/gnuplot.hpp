// What every plot of ringdown shares (transient, Bode, pole map): the
// `--plot` target, the gnuplot terminal for it, SI-scaled axes and tick
// labels, the layout of panels stacked over one x axis, and running gnuplot
// (gnuplot-iostream, LIBRARIES.md section 4) into an atomic file
// (atomic_file.hpp) that is checked to be a valid PNG, SVG or PDF before it
// replaces the target. A text plot (`term`) goes to stdout, sized to the
// terminal: its size from the terminal, else COLUMNS/LINES, else 100x30.
//
// Not here: what is plotted. Each kind of plot builds its own gnuplot
// commands (plot.cpp, bode_plot.cpp, pole_plot.cpp) with these helpers.
#pragma once

#include <cstddef>
#include <functional>
#include <optional>
#include <sstream>
#include <string>
#include <utility>
#include <vector>

#include "cli/terminal.hpp"

namespace ringdown::cli {

// Left margin in characters, the same for every panel of a page so their x
// axes line up whatever the width of their tick labels: room for "-500" and a
// rotated y label in an image, for "-2.5" and the tick mark in a text plot.
// A tick label of a text plot needs kTextTickColumns ("100k" and a blank
// either side).
inline constexpr int kImageLeftMargin = 12;
inline constexpr int kTextLeftMargin = 8;
inline constexpr int kTextTickColumns = 7;

struct PlotTarget {
  enum class Kind { Terminal, Png, Svg, Pdf };
  Kind kind = Kind::Terminal;
  std::string path;  // empty for Terminal
  bool text() const { return kind == Kind::Terminal; }
};

// "term", or a path ending in .png/.svg/.pdf (any case). nullopt + error else.
std::optional<PlotTarget> parse_plot_target(const std::string& text, std::string& error);

// True when a gnuplot executable is on PATH.
bool gnuplot_available();

// The checks a command makes before it computes anything: a valid target and
// gnuplot on PATH. nullopt after printing why not (the caller exits 2).
// `csv_to_stdout`: --csv - was given, which a text plot would mix with.
std::optional<PlotTarget> plot_target_or_report(const std::string& text, bool csv_to_stdout);

// An axis scaled to an SI prefix: displayed = value / factor, labelled
// "time (us)" with the prefix.
struct Scale {
  double factor = 1;
  std::string prefix;  // "m", "u" (or the micro sign), ...
};

// SI prefix whose range [1, 1000) holds `magnitude` (SI Brochure 2019,
// table 7), from femto to tera; `ascii` writes micro as u (a text plot may
// not line up a two-byte character).
Scale si_scale(double magnitude, bool ascii);

// A tick label with an SI prefix and no unit: 1000 -> "1k", 5e-7 -> "500n",
// 2e-6 -> "2u" (or "2µ"), 200 -> "200".
std::string si_tick_label(double value, bool ascii);

// A gnuplot single-quoted string: '' stands for ' (gnuplot 5.4 help "quotes").
std::string gnuplot_quoted(const std::string& text);

// The "nice" step 1, 2 or 5 x 10^k at or above `raw` (common practice, no source).
double nice_step(double raw);

// The character gnuplot's text terminal draws curve k of a plot with when it
// is given `lt k+1` (gnuplot 5.4 term/dumb.trm: * # $ % @ & =, repeating).
char text_pen(std::size_t k);

// Image size in pixels; a PDF is drawn at 100 pixels to the inch.
struct ImageSize {
  int width = 1000;
  int height = 700;
};

// Where one panel of a stack sits (gnuplot "screen" fractions of the page).
struct PanelFrame {
  double top = 1, bottom = 0;
  int data_rows = 0;    // text plot: rows inside the borders; 0 for images
  bool lowest = false;  // carries the x tick labels and the x label
};

// Panels stacked over one shared x axis, the page's title on top and the x
// tick labels and label under the lowest panel only. `weights` (one per
// panel, > 0) share the height; a text plot counts whole rows so every
// border falls on a row of its own. `text_lines` is the height of a text
// plot; `image_height` in pixels for an image.
std::vector<PanelFrame> stack_panels(const std::vector<double>& weights, bool text, int text_lines,
                                     int image_height);

// Commands that place a panel: its margins at the frame; on the lowest panel
// automatic x tick labels and `x_label`, on the others neither. (Explicit tic
// lists with their own labels are the caller's: `set format` does not blank them.)
std::string panel_commands(const PanelFrame& frame, const std::string& x_label);

// The y axis of a text panel: a range padded by one row on each side (so a
// flat curve never lies on a border, where the label would hide it) and a
// tick at most every other row. `step_of` turns a raw step into a round one
// (nice_step by default). Empty when low/high are not finite.
std::string text_y_axis(double low, double high, int data_rows,
                        const std::function<double(double)>& step_of = nice_step);

// `text` cut to `columns` characters with "..." (gnuplot's text terminal
// drops a label that does not fit instead of cutting it).
std::string fit_text(const std::string& text, int columns);

// The header a text panel carries in its top border instead of a y label and
// a key (the text terminal neither rotates text nor keeps a key off the
// curves): "voltage (V): * drain  # out", cut to `columns`.
std::string text_panel_header(const std::string& label, const std::vector<std::string>& names,
                              int columns);

// Starts the page: `set multiplot` with the title (cut to the width of a
// text plot, which drops a longer one), and the settings every plot shares.
std::string page_commands(const std::string& title, bool text, int columns);

// Inline data for gnuplot's '-' file: one "x y" line per point (NaN for an
// undefined value), ended by "e".
void append_points(std::ostringstream& gp, const std::vector<std::pair<double, double>>& points,
                   double x_factor = 1, double y_factor = 1);

// Draws one figure. `body` gets the size of a text plot (columns, lines) and
// returns the gnuplot commands after `set terminal`/`set output` (multiplot,
// plots, data). For a text plot the result goes to stdout; for a file it is
// written to a temporary beside the target, checked to be a valid PNG, SVG
// or PDF, and renamed over the target; the target is untouched on failure.
// Returns false with `error` set when gnuplot is missing or fails.
bool render_figure(const PlotTarget& target, ImageSize image,
                   const std::function<std::string(const TerminalSize& text)>& body,
                   std::string& error);

}  // namespace ringdown::cli
