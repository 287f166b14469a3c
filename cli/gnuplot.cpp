// See gnuplot.hpp. The gnuplot commands used are those of gnuplot 5.4 (its
// built-in help): set terminal {pngcairo|svg|pdfcairo|dumb}, set multiplot,
// set {t,b}margin at screen, plot '-' with inline data ended by "e".
#include "cli/gnuplot.hpp"

#include <sys/stat.h>
#include <unistd.h>

#include <algorithm>
#include <cctype>
#include <cmath>
#include <csignal>
#include <cstdio>
#include <cstdlib>
#include <fstream>
#include <numeric>
#include <string_view>

#include "cli/atomic_file.hpp"
#include "cli/console.hpp"

// gnuplot-iostream (2014 snapshot) trips -Wextra/-Wpedantic in its own code.
#pragma GCC diagnostic push
#pragma GCC diagnostic ignored "-Wunused-parameter"
#pragma GCC diagnostic ignored "-Wpedantic"
#pragma GCC diagnostic ignored "-Wdeprecated-declarations"
#include "gnuplot-iostream.h"
#pragma GCC diagnostic pop

namespace ringdown::cli {

namespace {

// Text plot size when the terminal's is unknown (issue 3: "else 100x30"),
// and the smallest the layouts still work in.
constexpr TerminalSize kDefaultTerminal = {100, 30};
constexpr int kMinColumns = 40;
constexpr int kMinLines = 12;

// Image layout of a panel stack, in pixels: the page title above the first
// panel, the x tick labels and x label below the last, a gap between panels
// (readable on a laptop screen and in a report; common practice, no source).
constexpr double kTitlePx = 45;
constexpr double kBottomPx = 55;
constexpr double kGapPx = 14;
// Text layout of a panel stack, in rows: the title on the top row, the x
// tick labels and the x label on the two bottom rows.
constexpr int kTextTitleRows = 1;
constexpr int kTextBottomRows = 2;

// File signatures: PNG (ISO/IEC 15948:2004, section 5.2), PDF (ISO 32000-1:2008,
// section 7.5.2 "%PDF-"), SVG is XML (W3C SVG 1.1: "<?xml" or "<svg").
constexpr unsigned char kPngSignature[8] = {0x89, 'P', 'N', 'G', '\r', '\n', 0x1A, '\n'};

bool file_has_signature(const std::string& path, PlotTarget::Kind kind) {
  std::ifstream in(path, std::ios::binary);
  char head[256] = {};
  in.read(head, sizeof head);
  const auto n = static_cast<std::size_t>(in.gcount());
  const std::string_view text(head, n);
  switch (kind) {
    case PlotTarget::Kind::Png:
      return n >= 8 && std::equal(kPngSignature, kPngSignature + 8,
                                  reinterpret_cast<const unsigned char*>(head));
    case PlotTarget::Kind::Pdf:
      return text.substr(0, 5) == "%PDF-";
    case PlotTarget::Kind::Svg: {
      const auto first = text.find_first_not_of(" \t\r\n");
      return first != std::string_view::npos &&
             (text.substr(first, 5) == "<?xml" || text.substr(first, 4) == "<svg");
    }
    case PlotTarget::Kind::Terminal:
      return n > 0;
  }
  return false;
}

std::string terminal_commands(const PlotTarget& target, ImageSize image, const TerminalSize& text) {
  std::ostringstream gp;
  switch (target.kind) {
    case PlotTarget::Kind::Png:
      gp << "set terminal pngcairo noenhanced size " << image.width << "," << image.height
         << " font 'sans,10'\n";
      break;
    case PlotTarget::Kind::Svg:
      gp << "set terminal svg noenhanced size " << image.width << "," << image.height
         << " font 'sans,10' background '#ffffff'\n";
      break;
    case PlotTarget::Kind::Pdf:
      gp << "set terminal pdfcairo noenhanced size " << image.width / 100.0 << "in,"
         << image.height / 100.0 << "in font 'sans,9'\n";
      break;
    case PlotTarget::Kind::Terminal:
      gp << "set terminal dumb noenhanced nofeed size " << text.columns << "," << text.lines
         << "\n";
      break;
  }
  return gp.str();
}

// Runs gnuplot on `commands`; SIGPIPE is ignored meanwhile so a gnuplot that
// exits early gives a write error here instead of killing ringdown.
bool run_gnuplot(const std::string& commands, std::string& error) {
  struct sigaction ignore {
  }, previous{};
  ignore.sa_handler = SIG_IGN;
  sigemptyset(&ignore.sa_mask);
  ::sigaction(SIGPIPE, &ignore, &previous);
  bool ok = true;
  try {
    Gnuplot gp("gnuplot");
    gp << commands << "exit\n";
    gp.flush();
    if (!gp.good()) ok = false;
  } catch (const std::exception& e) {
    error = std::string("cannot run gnuplot: ") + e.what();
    ok = false;
  }
  ::sigaction(SIGPIPE, &previous, nullptr);
  if (!ok && error.empty()) error = "gnuplot stopped before the plot was complete";
  return ok;
}

std::string temp_dir() {
  const char* dir = std::getenv("TMPDIR");
  return dir && *dir ? dir : "/tmp";
}

}  // namespace

std::optional<PlotTarget> parse_plot_target(const std::string& text, std::string& error) {
  if (text == "term") return PlotTarget{PlotTarget::Kind::Terminal, {}};
  const auto dot = text.rfind('.');
  std::string extension = dot == std::string::npos ? "" : text.substr(dot + 1);
  std::transform(extension.begin(), extension.end(), extension.begin(),
                 [](unsigned char c) { return static_cast<char>(std::tolower(c)); });
  if (extension == "png") return PlotTarget{PlotTarget::Kind::Png, text};
  if (extension == "svg") return PlotTarget{PlotTarget::Kind::Svg, text};
  if (extension == "pdf") return PlotTarget{PlotTarget::Kind::Pdf, text};
  error = "--plot: '" + text + "' is neither 'term' nor a file name ending in .png, .svg or .pdf";
  return std::nullopt;
}

bool gnuplot_available() {
  const char* path = std::getenv("PATH");
  std::string dirs = path ? path : "/usr/bin:/bin";
  std::size_t start = 0;
  while (start <= dirs.size()) {
    const std::size_t end = std::min(dirs.find(':', start), dirs.size());
    std::string dir = dirs.substr(start, end - start);
    if (dir.empty()) dir = ".";
    if (::access((dir + "/gnuplot").c_str(), X_OK) == 0) return true;
    start = end + 1;
  }
  return false;
}

std::optional<PlotTarget> plot_target_or_report(const std::string& text, bool csv_to_stdout) {
  std::string error;
  std::optional<PlotTarget> target = parse_plot_target(text, error);
  if (!target) {
    print_error(error, "for example --plot term, or --plot response.png");
    return std::nullopt;
  }
  if (target->text() && csv_to_stdout) {
    print_error("--csv - and --plot term would both write to stdout",
                "write the CSV to a file, or plot to a .png/.svg/.pdf file");
    return std::nullopt;
  }
  if (!gnuplot_available()) {
    print_error("--plot needs gnuplot, which is not on PATH",
                "install the Debian package gnuplot-nox");
    return std::nullopt;
  }
  return target;
}

Scale si_scale(double magnitude, bool ascii) {
  static const char* const kNames[] = {"f", "p", "n", "u", "m", "", "k", "M", "G", "T"};
  constexpr int kLowest = -15, kHighest = 12;
  Scale s;
  if (!(magnitude > 0) || !std::isfinite(magnitude)) return s;
  int e3 = static_cast<int>(std::floor(std::log10(magnitude) / 3.0)) * 3;
  if (magnitude / std::pow(10.0, e3) >= 1000.0) e3 += 3;
  if (magnitude / std::pow(10.0, e3) < 1.0) e3 -= 3;
  e3 = std::clamp(e3, kLowest, kHighest);
  s.factor = std::pow(10.0, e3);
  s.prefix = kNames[(e3 - kLowest) / 3];
  if (!ascii && s.prefix == "u") s.prefix = "\xC2\xB5";  // U+00B5 MICRO SIGN
  return s;
}

std::string si_tick_label(double value, bool ascii) {
  if (value == 0) return "0";
  const Scale s = si_scale(std::fabs(value), ascii);
  char number[32];
  // Four significant digits: ticks are round numbers, so %g drops the rest.
  std::snprintf(number, sizeof number, "%.4g", value / s.factor);
  return number + s.prefix;
}

std::string gnuplot_quoted(const std::string& text) {
  std::string out = "'";
  for (char c : text) {
    if (c == '\'') out += '\'';
    if (c == '\n' || c == '\r') c = ' ';
    out += c;
  }
  return out + "'";
}

double nice_step(double raw) {
  const double decade = std::pow(10.0, std::floor(std::log10(raw)));
  const double m = raw / decade;
  return (m <= 1 ? 1 : m <= 2 ? 2 : m <= 5 ? 5 : 10) * decade;
}

char text_pen(std::size_t k) {
  static constexpr char kPens[] = {'*', '#', '$', '%', '@', '&', '='};
  return kPens[k % sizeof kPens];
}

std::vector<PanelFrame> stack_panels(const std::vector<double>& weights, bool text, int text_lines,
                                     int image_height) {
  std::vector<PanelFrame> frames(weights.size());
  if (weights.empty()) return frames;
  const double total = std::accumulate(weights.begin(), weights.end(), 0.0);
  const int n = static_cast<int>(weights.size());
  if (text) {
    // Rows are counted from the bottom, 0 .. lines-1 (gnuplot's text terminal
    // puts screen y = row / (lines - 1) on a row of its own). Each panel gets
    // its two border rows and the data rows between them.
    const int top_row = text_lines - 1 - kTextTitleRows;
    const int rows = top_row - kTextBottomRows + 1;
    std::vector<int> share(weights.size());
    int used = 0;
    for (int i = 0; i < n; ++i) {
      share[i] = std::max(3, static_cast<int>(std::floor(rows * weights[i] / total)));
      used += share[i];
    }
    for (int i = 0; used < rows; i = (i + 1) % n, ++used) ++share[i];
    int row = top_row;
    const double last = text_lines - 1;
    // A quarter row up: gnuplot rounds a screen position down to its row.
    for (int i = 0; i < n; ++i) {
      frames[i].top = (row + 0.25) / last;
      frames[i].bottom = (row - share[i] + 1.25) / last;
      frames[i].data_rows = share[i] - 2;
      row -= share[i];
    }
  } else {
    const double h = image_height;
    const double top = 1 - kTitlePx / h, bottom = kBottomPx / h;
    const double span = top - bottom - (n - 1) * kGapPx / h;
    double y = top;
    for (int i = 0; i < n; ++i) {
      frames[i].top = y;
      frames[i].bottom = y - span * weights[i] / total;
      y = frames[i].bottom - kGapPx / h;
    }
  }
  frames.back().lowest = true;
  return frames;
}

std::string panel_commands(const PanelFrame& frame, const std::string& x_label) {
  std::ostringstream gp;
  gp.precision(10);
  gp << "set tmargin at screen " << frame.top << "\nset bmargin at screen " << frame.bottom << "\n";
  if (frame.lowest)
    gp << "set format x '% h'\nset xlabel " << gnuplot_quoted(x_label) << "\n";
  else
    gp << "set format x ''\nset xlabel ''\n";
  return gp.str();
}

std::string text_y_axis(double low, double high, int data_rows,
                        const std::function<double(double)>& step_of) {
  if (!std::isfinite(low) || !std::isfinite(high)) return {};
  if (!(high > low)) {
    // A constant: a unit-wide window around it (or around its own size).
    const double half = low == 0 ? 1 : std::fabs(low) * 0.5;
    low -= half, high += half;
  }
  const int rows = std::max(data_rows, 1);
  // Data rows plus the two border rows are rows + 1 intervals: one on each
  // side is padding.
  const double pad = (high - low) / std::max(rows - 1, 1);
  std::ostringstream gp;
  gp.precision(10);
  gp << "set yrange [" << low - pad << ":" << high + pad << "]\n";
  const double range = high - low + 2 * pad;
  gp << "set ytics " << step_of(range / std::max(1, (rows + 1) / 2)) << "\n";
  return gp.str();
}

std::string fit_text(const std::string& text, int columns) {
  const std::size_t room = static_cast<std::size_t>(std::max(columns, 4));
  return text.size() <= room ? text : text.substr(0, room - 3) + "...";
}

std::string text_panel_header(const std::string& label, const std::vector<std::string>& names,
                              int columns) {
  std::string out = label;
  for (std::size_t k = 0; k < names.size(); ++k) {
    out += k == 0 ? ": " : "  ";
    out += text_pen(k);
    out += ' ';
    out += names[k];
  }
  return fit_text(out, columns);
}

std::string page_commands(const std::string& title, bool text, int columns) {
  std::string out = "set multiplot title " +
                    gnuplot_quoted(text ? fit_text(title, columns - 2) : title) +
                    (text ? "" : " font 'sans,12'") + "\n";
  // A text plot has no room for tick marks on all four sides. An image's
  // autoscaled y axis spans the data and 5 % of air at both ends (not out to
  // the next tick), so a flat curve is not hidden in the border.
  if (text)
    out += "set xtics nomirror\nset ytics nomirror\n";
  else
    out += "set autoscale yfix\nset offsets 0, 0, graph 0.05, graph 0.05\n";
  return out;
}

void append_points(std::ostringstream& gp, const std::vector<std::pair<double, double>>& points,
                   double x_factor, double y_factor) {
  char line[64];
  for (const auto& [x, y] : points) {
    if (std::isfinite(x) && std::isfinite(y))
      std::snprintf(line, sizeof line, "%.10g %.10g\n", x / x_factor, y / y_factor);
    else
      std::snprintf(line, sizeof line, "%.10g NaN\n", x / x_factor);
    gp << line;
  }
  gp << "e\n";
}

bool render_figure(const PlotTarget& target, ImageSize image,
                   const std::function<std::string(const TerminalSize& text)>& body,
                   std::string& error) {
  if (!gnuplot_available()) {
    error = "--plot needs gnuplot, which is not on PATH (Debian package gnuplot-nox)";
    return false;
  }
  const bool text = target.text();
  // gnuplot writes into a temporary: beside the target for a file (renamed on
  // success), in TMPDIR for a text plot (copied to stdout, then removed).
  AtomicFile out(text ? temp_dir() + "/ringdown-plot.txt" : target.path);
  if (!out.ok()) {
    error = out.error();
    return false;
  }
  out.release_stream();
  TerminalSize size = terminal_size(STDOUT_FILENO, kDefaultTerminal);
  size.columns = std::max(size.columns, kMinColumns);
  // One line fewer than the terminal, so the prompt after the plot does not
  // scroll its title away.
  size.lines = std::max(size.lines - 1, kMinLines);
  const std::string commands = terminal_commands(target, image, size) + "set output " +
                               gnuplot_quoted(out.temp_path()) + "\n" + body(size) +
                               "unset output\n";
  if (!run_gnuplot(commands, error)) return false;
  if (!file_has_signature(out.temp_path(), target.kind)) {
    error = "gnuplot did not produce a valid " +
            std::string(text ? "text plot" : "file for '" + target.path + "'") +
            " (see its messages above)";
    return false;
  }
  if (!text) {
    if (!out.commit()) {
      error = out.error();
      return false;
    }
    return true;
  }
  // The text plot: drop gnuplot's form feed and trailing blanks.
  std::ifstream in(out.temp_path(), std::ios::binary);
  std::string line, all;
  while (std::getline(in, line)) {
    line.erase(std::remove(line.begin(), line.end(), '\f'), line.end());
    const auto last = line.find_last_not_of(' ');
    line.erase(last == std::string::npos ? 0 : last + 1);
    all += line;
    all += '\n';
  }
  std::fflush(stdout);
  std::fwrite(all.data(), 1, all.size(), stdout);
  std::fflush(stdout);
  return true;
}

}  // namespace ringdown::cli
