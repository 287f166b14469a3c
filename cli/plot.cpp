// See plot.hpp. The gnuplot commands used are those of gnuplot 5.4 (its
// built-in help): set terminal {pngcairo|svg|pdfcairo|dumb}, set multiplot
// layout, plot '-' with inline data ended by "e".
#include "cli/plot.hpp"

#include <sys/stat.h>
#include <unistd.h>

#include <algorithm>
#include <cctype>
#include <cmath>
#include <csignal>
#include <cstdio>
#include <cstdlib>
#include <fstream>
#include <map>
#include <sstream>

#include "cli/atomic_file.hpp"
#include "cli/terminal.hpp"

// gnuplot-iostream (2014 snapshot) trips -Wextra/-Wpedantic in its own code.
#pragma GCC diagnostic push
#pragma GCC diagnostic ignored "-Wunused-parameter"
#pragma GCC diagnostic ignored "-Wpedantic"
#pragma GCC diagnostic ignored "-Wdeprecated-declarations"
#include "gnuplot-iostream.h"
#pragma GCC diagnostic pop

namespace ringdown::cli {

namespace {

// Image sizes: 1000 px (or 10 in) wide, a panel 280 px (2.8 in) high, plus
// room for the title: readable on a laptop screen and in a report (common
// practice, no source).
constexpr int kImageWidthPx = 1000;
constexpr int kPanelHeightPx = 280;
constexpr int kTitleHeightPx = 40;
constexpr double kPdfWidthIn = 10.0;
constexpr double kPdfPanelHeightIn = 2.8;
// Text plot size when the terminal's is unknown (issue 3: "else 100x30"),
// and the smallest the layout still works in.
constexpr TerminalSize kDefaultTerminal = {100, 30};
constexpr int kMinColumns = 40;
constexpr int kMinLines = 12;

// File signatures: PNG (ISO/IEC 15948:2004, section 5.2), PDF (ISO 32000-1:2008,
// section 7.5.2 "%PDF-"), SVG is XML (W3C SVG 1.1: "<?xml" or "<svg").
constexpr unsigned char kPngSignature[8] = {0x89, 'P', 'N', 'G', '\r', '\n', 0x1A, '\n'};

struct Scale {
  double factor = 1;   // displayed = value / factor
  std::string prefix;  // "m", "u", ...
};

// SI prefix whose range [1, 1000) holds `magnitude` (SI Brochure 2019,
// table 7), from femto to tera; `ascii` writes micro as u (a text plot may
// not line up a two-byte character).
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

// Rows of a text plot outside the plotting area: the multiplot title (2), and
// per panel its title, the two borders, the tick labels and the time label.
constexpr int kTextTitleRows = 2;
constexpr int kTextPanelFrameRows = 5;

// The "nice" step 1, 2 or 5 x 10^k at or above `raw` (the usual choice for
// axis ticks; common practice, no source).
double nice_step(double raw) {
  const double decade = std::pow(10.0, std::floor(std::log10(raw)));
  const double m = raw / decade;
  return (m <= 1 ? 1 : m <= 2 ? 2 : m <= 5 ? 5 : 10) * decade;
}

// A gnuplot single-quoted string: '' stands for ' (gnuplot 5.4 help "quotes").
std::string quoted(const std::string& text) {
  std::string out = "'";
  for (char c : text) {
    if (c == '\'') out += '\'';
    if (c == '\n' || c == '\r') c = ' ';
    out += c;
  }
  return out + "'";
}

std::string quantity_word(const std::string& symbol) {
  if (symbol == "V") return "voltage";
  if (symbol == "A") return "current";
  if (symbol == "W") return "power";
  if (symbol == "J") return "energy";
  if (symbol.empty()) return "value";
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
    case PlotTarget::Kind::Pdf: return text.substr(0, 5) == "%PDF-";
    case PlotTarget::Kind::Svg: {
      const auto first = text.find_first_not_of(" \t\r\n");
      return first != std::string_view::npos &&
             (text.substr(first, 5) == "<?xml" || text.substr(first, 4) == "<svg");
    }
    case PlotTarget::Kind::Terminal: return n > 0;
  }
  return false;
}

// The gnuplot script: terminal, multiplot layout, one `plot` per panel with
// inline data.
std::string script(const PlotRequest& request, const PlotData& data, const std::string& output,
                   const TerminalSize& text_size) {
  const bool text = request.target.kind == PlotTarget::Kind::Terminal;
  const std::vector<Panel> panels = panels_by_unit(data.signals());
  const int n = static_cast<int>(std::max<std::size_t>(panels.size(), 1));
  std::ostringstream gp;
  gp.precision(10);
  switch (request.target.kind) {
    case PlotTarget::Kind::Png:
      gp << "set terminal pngcairo noenhanced size " << kImageWidthPx << ","
         << kTitleHeightPx + n * kPanelHeightPx << " font 'sans,10'\n";
      break;
    case PlotTarget::Kind::Svg:
      gp << "set terminal svg noenhanced size " << kImageWidthPx << ","
         << kTitleHeightPx + n * kPanelHeightPx << " font 'sans,10' background '#ffffff'\n";
      break;
    case PlotTarget::Kind::Pdf:
      gp << "set terminal pdfcairo noenhanced size " << kPdfWidthIn << "in,"
         << 0.4 + n * kPdfPanelHeightIn << "in font 'sans,9'\n";
      break;
    case PlotTarget::Kind::Terminal:
      gp << "set terminal dumb noenhanced nofeed size " << text_size.columns << ","
         << text_size.lines << "\n";
      break;
  }
  gp << "set output " << quoted(output) << "\n";
  const Scale t_scale = si_scale(request.t_end, text);
  gp << "set multiplot layout " << n << ",1 title " << quoted(request.title)
     << (text ? "" : " font 'sans,12'") << "\n";
  if (!text) gp << "set grid\nset key top right box opaque\n";
  else gp << "set key top right\n";
  gp << "set xrange [0:" << request.t_end / t_scale.factor << "]\n";
  if (panels.empty()) {
    gp << "set xlabel " << quoted("time (" + t_scale.prefix + "s)") << "\n";
    gp << "set label 1 'nothing recorded' at graph 0.5,0.5 center\nplot NaN notitle\n";
  }
  for (std::size_t p = 0; p < panels.size(); ++p) {
    const Panel& panel = panels[p];
    double peak = 0;
    for (std::size_t k : panel.signals)
      for (const auto& [t, v] : data.points()[k]) peak = std::max(peak, std::fabs(v));
    // A dimensionless or unknown unit is shown unscaled: a prefix alone reads oddly.
    const Scale y = panel.symbol.empty() ? Scale{} : si_scale(peak, text);
    const std::string unit = y.prefix + panel.symbol;
    const std::string y_label = quantity_word(panel.symbol) + (unit.empty() ? "" : " (" + unit + ")");
    // The text terminal cannot rotate text and drops a y label: there the
    // panel's own title carries it.
    if (text) {
      gp << "set title " << quoted(y_label) << "\n";
      // A text panel has few rows: ask for a tick every other row at most,
      // or gnuplot's labels run into each other.
      double low = 0, high = 0;
      for (std::size_t k : panel.signals)
        for (const auto& [t, v] : data.points()[k]) low = std::min(low, v), high = std::max(high, v);
      const int rows = (text_size.lines - kTextTitleRows) / n - kTextPanelFrameRows;
      const double range = (high - low) / y.factor;
      if (range > 0 && rows >= 2) gp << "set ytics " << nice_step(range / std::max(1, rows / 2)) << "\n";
      else gp << "set ytics autofreq\n";
    } else {
      gp << "set ylabel " << quoted(y_label) << "\n";
    }
    // The time label on the lowest panel only in a text plot (rows are scarce).
    const bool label_time = !text || p + 1 == panels.size();
    gp << "set xlabel " << (label_time ? quoted("time (" + t_scale.prefix + "s)") : "''") << "\n";
    gp << "plot ";
    for (std::size_t i = 0; i < panel.signals.size(); ++i) {
      if (i) gp << ", ";
      gp << "'-' using 1:2 with lines lw " << (text ? 1 : 1.5) << " title "
         << quoted(data.signals()[panel.signals[i]].name);
    }
    gp << "\n";
    for (std::size_t k : panel.signals) {
      char line[64];
      for (const auto& [t, v] : data.points()[k]) {
        std::snprintf(line, sizeof line, "%.10g %.10g\n", t / t_scale.factor, v / y.factor);
        gp << line;
      }
      gp << "e\n";
    }
  }
  gp << "unset multiplot\nunset output\n";
  return gp.str();
}

// Runs gnuplot on `commands`; SIGPIPE is ignored meanwhile so a gnuplot that
// exits early gives a write error here instead of killing ringdown.
bool run_gnuplot(const std::string& commands, std::string& error) {
  struct sigaction ignore {}, previous {};
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

bool draw_plot(const PlotRequest& request, const PlotData& data, std::string& error) {
  if (!gnuplot_available()) {
    error = "--plot needs gnuplot, which is not on PATH (Debian package gnuplot-nox)";
    return false;
  }
  const bool text = request.target.kind == PlotTarget::Kind::Terminal;
  // gnuplot writes into a temporary: beside the target for a file (renamed on
  // success), in TMPDIR for a text plot (copied to stdout, then removed).
  AtomicFile out(text ? temp_dir() + "/ringdown-plot.txt" : request.target.path);
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
  if (!run_gnuplot(script(request, data, out.temp_path(), size), error)) return false;
  if (!file_has_signature(out.temp_path(), request.target.kind)) {
    error = "gnuplot did not produce a valid " +
            std::string(text ? "text plot" : "file for '" + request.target.path + "'") +
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
