// End-to-end tests of the plots of `ringdown freq --plot` (Bode) and
// `ringdown modes --plot` (pole map), and of the text layout every plot
// shares (issue 5): the built binary is run on small circuit files in a fresh
// temporary directory; files are checked to be complete PNG, SVG or PDF, text
// plots to fit COLUMNS x LINES and to carry their labels, bad targets and a
// failing gnuplot to exit 2 without leaving a file. A few pure helpers of
// cli/gnuplot.hpp, bode_plot.hpp and pole_plot.hpp are checked directly.
//
// Not here: how a plot looks (that is looked at, docs/img/), the transient's
// own file test (cli_test.cpp).
#include <gtest/gtest.h>
#include <sys/stat.h>
#include <unistd.h>

#include <algorithm>
#include <complex>
#include <filesystem>
#include <fstream>
#include <regex>
#include <sstream>
#include <string>
#include <vector>

#include "cli/bode_plot.hpp"
#include "cli/gnuplot.hpp"
#include "cli/histogram_plot.hpp"
#include "cli/pole_plot.hpp"
#include "process.hpp"
#include "scratch_dir.hpp"

namespace fs = std::filesystem;
using ringdown::test::ProcessResult;
using ringdown::test::run_ringdown;

namespace {

constexpr int kOk = 0, kBadInput = 2;  // CLI.md exit codes

// RC low-pass, tau = 1 us (corner 159 kHz), with a frequency statement.
constexpr const char* kLowPass = R"(title "RC low-pass for plots"
voltage   V1 in  gnd  step(from=0, to=5V, at=1u)
resistor  R1 in  out  1k
capacitor C1 out gnd  1n
transient until=10u every=10n
frequency from=1kHz to=1MHz per_decade=20 input=V1
record    out, R1.i
)";

// Series RLC (L = 1 mH, C = 1 uF, natural frequency 5.033 kHz in both
// configurations) whose series resistance drops from 50 to 10 Ohm when S1
// closes across R2 at 1 ms: two configurations, one complex pair each
// (zeta = R/2 sqrt(C/L) = 0.79 and 0.16; Nilsson & Riedel, from memory).
constexpr const char* kSwitchedRlc = R"(title "Series RLC with a switched damping resistor"
voltage   V1 in gnd step(from=0, to=1, at=10u)
resistor  R1 in a  10
resistor  R2 a  b  40
switch    S1 a  b  gate=step(from=0, to=1, at=1m) closed=1m open=1G
inductor  L1 b  c  1mH
capacitor C1 c gnd 1uF
transient until=2m
)";

// Poles spread over decades: a 1 ms RC and a 1 ns RC (ratio 1e6 > 100), so
// the pole map's radius is logarithmic.
constexpr const char* kSpread = R"(title "Slow and fast RC"
voltage   V1 in gnd 1
resistor  R1 in a 1k
capacitor C1 a gnd 1u
resistor  R2 in b 1
capacitor C2 b gnd 1n
transient until=5m
)";

// File signatures and ends: PNG starts with its 8-byte signature and ends
// with the IEND chunk (ISO/IEC 15948:2004, 5.2 and 11.2.5); PDF starts with
// "%PDF-" and ends with "%%EOF" (ISO 32000-1:2008, 7.5.2 and 7.5.5); SVG is
// an XML document whose root element is <svg> (W3C SVG 1.1, 5.1).
void expect_complete(const std::string& bytes, const std::string& extension) {
  ASSERT_GT(bytes.size(), 200u) << extension;
  if (extension == "png") {
    EXPECT_EQ(bytes.substr(0, 8), std::string("\x89PNG\r\n\x1a\n", 8));
    EXPECT_EQ(bytes.substr(bytes.size() - 8, 4), "IEND");
  } else if (extension == "pdf") {
    EXPECT_EQ(bytes.substr(0, 5), "%PDF-");
    EXPECT_NE(bytes.find("%%EOF", bytes.size() - 32), std::string::npos);
  } else {
    EXPECT_TRUE(bytes.rfind("<?xml", 0) == 0 || bytes.rfind("<svg", 0) == 0) << bytes.substr(0, 40);
    EXPECT_NE(bytes.find("<svg"), std::string::npos);
    const auto end = bytes.find_last_not_of(" \r\n\t");
    ASSERT_NE(end, std::string::npos);
    EXPECT_EQ(bytes.substr(end + 1 - 6, 6), "</svg>");
  }
}

std::vector<std::string> lines_of(const std::string& text) {
  std::vector<std::string> out;
  std::istringstream in(text);
  for (std::string line; std::getline(in, line);) out.push_back(line);
  return out;
}

// The text plot in a command's stdout: from the last line that is the
// centred title (the modes table and the freq summary come before it).
std::vector<std::string> plot_lines(const std::string& out, const std::string& title) {
  const std::vector<std::string> all = lines_of(out);
  std::size_t start = 0;
  for (std::size_t i = 0; i < all.size(); ++i) {
    const auto first = all[i].find_first_not_of(' ');
    if (first != std::string::npos && first > 0 && all[i].substr(first) == title) start = i;
  }
  return {all.begin() + static_cast<std::ptrdiff_t>(start), all.end()};
}

// The plot fits: no line wider than `columns`, no more lines than `lines`,
// and it uses the room it has (within a few columns and rows).
void expect_fits(const std::vector<std::string>& plot, int columns, int lines,
                 const std::string& what) {
  ASSERT_FALSE(plot.empty()) << what;
  std::size_t widest = 0;
  for (const std::string& line : plot) widest = std::max(widest, line.size());
  EXPECT_LE(widest, static_cast<std::size_t>(columns)) << what;
  EXPECT_GE(widest + 10, static_cast<std::size_t>(columns)) << what << ": uses the width";
  EXPECT_LE(plot.size(), static_cast<std::size_t>(lines)) << what;
  EXPECT_GE(plot.size() + 4, static_cast<std::size_t>(lines)) << what << ": uses the height";
  for (const std::string& line : plot) EXPECT_EQ(line.find('\f'), std::string::npos) << what;
}

// Rows inside a text panel's borders ("   100 |   **   |"), grouped per
// panel (a border or any other line ends a group).
std::vector<int> panel_data_rows(const std::vector<std::string>& plot) {
  static const std::regex data_row(R"(^ *[-+0-9.eE]* *\|.*\|$)");
  std::vector<int> panels;
  bool inside = false;
  for (const std::string& line : plot) {
    const bool row = std::regex_match(line, data_row);
    if (row && !inside) panels.push_back(0);
    if (row) ++panels.back();
    inside = row;
  }
  return panels;
}

class PlotCli : public ringdown::test::ScratchDirTest {
 protected:
  // A directory with a stand-in `gnuplot` script, for PATH.
  std::string fake_gnuplot(const std::string& body) {
    const fs::path bin = dir_ / "fakebin";
    fs::create_directories(bin);
    const fs::path script = bin / "gnuplot";
    std::ofstream(script) << "#!/bin/sh\n" << body;
    ::chmod(script.c_str(), 0755);
    return bin.string() + ":/usr/bin:/bin";
  }
};

// --- files --------------------------------------------------------------------

TEST_F(PlotCli, BodePlotFilesAreComplete) {
  const std::string file = write("rc.rlc", kLowPass);
  for (const char* extension : {"png", "svg", "pdf"}) {
    const std::string target = path(std::string("bode.") + extension);
    const ProcessResult r = run_ringdown({"freq", file, "--plot", target, "--quiet"});
    ASSERT_EQ(r.exit_code, kOk) << extension << "\n" << r.err;
    const std::string bytes = read_all(target);
    expect_complete(bytes, extension);
    if (std::string(extension) == "svg") {
      // The title, the legend from the record names, SI-prefixed ticks.
      for (const char* text :
           {"RC low-pass for plots", ">out<", ">R1.i<", ">1k<", ">10k<", ">100k<", ">1M<",
            "magnitude (dB)", "phase (deg)", "frequency (Hz)", "input V1"})
        EXPECT_NE(bytes.find(text), std::string::npos) << text;
    }
  }
  EXPECT_TRUE(hidden_files().empty());
}

TEST_F(PlotCli, PoleMapFilesAreComplete) {
  const std::string switched = write("sw.rlc", kSwitchedRlc);
  const std::string spread = write("spread.rlc", kSpread);
  for (const char* extension : {"png", "svg", "pdf"}) {
    for (const std::string& file : {switched, spread}) {
      const std::string target = path(fs::path(file).stem().string() + "." + extension);
      const ProcessResult r = run_ringdown({"modes", file, "--plot", target});
      ASSERT_EQ(r.exit_code, kOk) << target << "\n" << r.err;
      EXPECT_NE(r.out.find("Natural modes"), std::string::npos) << "the table comes first";
      expect_complete(read_all(target), extension);
    }
  }
  const std::string svg = read_all(path("sw.svg"));
  // Title, the damping-ratio guides, a key line per switch configuration,
  // Hz-equivalent axes (U+03B6 zeta and U+03C0 pi in UTF-8).
  for (const char* text :
       {"Series RLC with a switched damping resistor", "\xCE\xB6 = 0.1", "\xCE\xB6 = 0.3",
        "\xCE\xB6 = 0.5", "\xCE\xB6 = 0.7", "1: S1 open (from 0 s)", "2: S1 closed (from 1 ms)",
        "Re(s)/2\xCF\x80 (kHz)", "Im(s)/2\xCF\x80 (kHz)"})
    EXPECT_NE(svg.find(text), std::string::npos) << text;
  // The spread circuit: logarithmic radius with decade circles labelled in Hz.
  const std::string log_svg = read_all(path("spread.svg"));
  for (const char* text : {"log radius", "1k Hz", "100M Hz"})
    EXPECT_NE(log_svg.find(text), std::string::npos) << text;
  EXPECT_TRUE(hidden_files().empty());
}

// --- text plots ---------------------------------------------------------------

TEST_F(PlotCli, BodeTerminalPlotFitsAndIsLabelled) {
  const std::string file = write("rc.rlc", kLowPass);
  for (auto [columns, lines] : {std::pair{60, 20}, std::pair{100, 30}, std::pair{40, 14}}) {
    const ProcessResult r =
        run_ringdown({"freq", file, "--plot", "term", "--quiet"},
                     {{"COLUMNS", std::to_string(columns)}, {"LINES", std::to_string(lines)}});
    ASSERT_EQ(r.exit_code, kOk) << r.err;
    const auto plot = lines_of(r.out);
    const std::string what = "freq " + std::to_string(columns) + "x" + std::to_string(lines);
    // One line fewer than LINES, for the prompt after it.
    expect_fits(plot, columns, lines - 1, what);
    // Magnitude panel over the phase panel, one frequency axis under both.
    const auto at = [&](const std::string& text) {
      for (std::size_t i = 0; i < plot.size(); ++i)
        if (plot[i].find(text) != std::string::npos) return static_cast<int>(i);
      return -1;
    };
    ASSERT_GE(at("magnitude (dB)"), 0) << r.out;
    EXPECT_GT(at("phase (deg)"), at("magnitude (dB)")) << r.out;
    EXPECT_GT(at("frequency (Hz)"), at("phase (deg)")) << r.out;
    EXPECT_EQ(panel_data_rows(plot).size(), 2u) << r.out;
    // SI-prefixed decade ticks, every one when there is room.
    const std::string ticks = plot[static_cast<std::size_t>(at("frequency (Hz)") - 1)];
    for (const char* tick : {"1k", "1M"}) EXPECT_NE(ticks.find(tick), std::string::npos) << ticks;
    if (columns >= 60) {
      for (const char* tick : {"10k", "100k"})
        EXPECT_NE(ticks.find(tick), std::string::npos) << ticks;
      // The legend in the magnitude panel's border: pen characters of
      // gnuplot's text terminal, then the record names.
      EXPECT_NE(r.out.find("* out  # R1.i"), std::string::npos) << r.out;
    }
  }
}

TEST_F(PlotCli, PoleMapTerminalPlotFitsAndShowsEveryPole) {
  const std::string file = write("sw.rlc", kSwitchedRlc);
  const std::string title = "Series RLC with a switched damping resistor";
  for (auto [columns, lines] : {std::pair{80, 24}, std::pair{100, 40}}) {
    const ProcessResult r =
        run_ringdown({"modes", file, "--plot", "term"},
                     {{"COLUMNS", std::to_string(columns)}, {"LINES", std::to_string(lines)}});
    ASSERT_EQ(r.exit_code, kOk) << r.err;
    const auto plot = plot_lines(r.out, title);
    expect_fits(plot, columns, lines - 1,
                "modes " + std::to_string(columns) + "x" + std::to_string(lines));
    // Inside the plane's borders: configuration 2's marker '2' once per
    // pole, both of the conjugate pair (the ray labels 0.1 ... 0.7 hold no 2;
    // the header row "Im(s)/2pi" is a border row, not inside).
    int twos = 0;
    bool below_top = false;
    for (const std::string& line : plot) {
      const auto open = line.find('|'), close = line.rfind('|');
      if (line.find("+Im(s)/2pi") != std::string::npos) below_top = true;
      if (!below_top || open == std::string::npos || close <= open) continue;
      twos += static_cast<int>(std::count(line.begin() + static_cast<std::ptrdiff_t>(open),
                                          line.begin() + static_cast<std::ptrdiff_t>(close), '2'));
    }
    EXPECT_EQ(twos, 2) << r.out;
    for (const char* text : {"0.1", "0.3", "0.5", "0.7", "Re(s)/2pi (kHz)", "1  S1 open (from 0 s)",
                             "2  S1 closed (from 1 ms)"})
      EXPECT_NE(r.out.find(text), std::string::npos) << text << "\n" << r.out;
  }
  // The logarithmic radius: decades as SI-prefixed ticks along the real axis.
  const ProcessResult r = run_ringdown({"modes", write("spread.rlc", kSpread), "--plot", "term"},
                                       {{"COLUMNS", "100"}, {"LINES", "30"}});
  ASSERT_EQ(r.exit_code, kOk) << r.err;
  const auto plot = plot_lines(r.out, "Slow and fast RC");
  expect_fits(plot, 100, 29, "modes log");
  EXPECT_NE(r.out.find("log radius"), std::string::npos) << r.out;
  EXPECT_NE(r.out.find("100M"), std::string::npos) << r.out;
}

TEST_F(PlotCli, TransientTerminalPanelsShareTheHeight) {
  // Three panels (V, A, W) in 30 lines: each gets a fair share of the rows
  // inside its borders, the time axis only under the last.
  const ProcessResult r = run_ringdown(
      {"run", write("rc.rlc", kLowPass), "--record", "out,R1.i,R1.p", "--plot", "term", "--quiet"},
      {{"COLUMNS", "100"}, {"LINES", "30"}});
  ASSERT_EQ(r.exit_code, kOk) << r.err;
  const auto plot = lines_of(r.out);
  expect_fits(plot, 100, 29, "run");
  const std::vector<int> panels = panel_data_rows(plot);
  ASSERT_EQ(panels.size(), 3u) << r.out;
  // 29 lines - title - tick labels - time label = 26 rows, 8 or 9 per panel
  // with its two borders: at least 6 inside.
  for (int rows : panels) EXPECT_GE(rows, 6) << r.out;
  for (const char* text :
       {"voltage (V): * out", "current (mA): * R1.i", "power (mW): * R1.p", "time (us)"})
    EXPECT_NE(r.out.find(text), std::string::npos) << text << "\n" << r.out;
  std::size_t time_labels = 0;
  for (const auto& line : plot) time_labels += line.find("time (us)") != std::string::npos;
  EXPECT_EQ(time_labels, 1u);
}

// --- bad targets and a failing gnuplot ---------------------------------------

TEST_F(PlotCli, BadTargetsExitTwoWithAMessage) {
  const std::string rc = write("rc.rlc", kLowPass);
  const std::string sw = write("sw.rlc", kSwitchedRlc);
  struct Case {
    std::vector<std::string> args;
    const char* message;
  };
  for (const Case& c :
       {Case{{"freq", rc, "--plot", "bode.jpg"}, "neither 'term' nor a file name"},
        Case{{"modes", sw, "--plot", "poles"}, "neither 'term' nor a file name"},
        Case{{"freq", rc, "--plot", "term", "--csv", "-"}, "would both write to stdout"},
        Case{{"freq", rc, "--plot", path("missing/dir/bode.png")}, "cannot create"},
        Case{{"modes", sw, "--plot", path("missing/dir/poles.svg")}, "cannot create"}}) {
    const ProcessResult r = run_ringdown(c.args);
    EXPECT_EQ(r.exit_code, kBadInput) << c.args[0] << " " << c.args[3];
    EXPECT_NE(r.err.find(c.message), std::string::npos) << r.err;
    EXPECT_NE(r.err.find("error"), std::string::npos) << r.err;
  }
  EXPECT_FALSE(fs::exists(path("bode.jpg")));
  EXPECT_TRUE(hidden_files().empty());
}

TEST_F(PlotCli, MissingGnuplotExitsTwoBeforeAnyWork) {
  const std::string empty_path = (dir_ / "nobin").string();
  fs::create_directories(empty_path);
  for (const std::vector<std::string>& args :
       {std::vector<std::string>{"freq", write("rc.rlc", kLowPass), "--plot", path("b.png")},
        std::vector<std::string>{"modes", write("sw.rlc", kSwitchedRlc), "--plot",
                                 path("p.png")}}) {
    const ProcessResult r = run_ringdown(args, {{"PATH", empty_path}});
    EXPECT_EQ(r.exit_code, kBadInput) << r.err;
    EXPECT_NE(r.err.find("needs gnuplot"), std::string::npos) << r.err;
    EXPECT_TRUE(r.out.empty()) << "nothing computed or printed: " << r.out;
  }
}

TEST_F(PlotCli, FailingGnuplotLeavesNoFile) {
  const std::string rc = write("rc.rlc", kLowPass);
  const std::string sw = write("sw.rlc", kSwitchedRlc);
  // A stand-in that writes half a file to the output it was given and fails,
  // and one that exits without reading its commands at all.
  const std::string half = fake_gnuplot(
      "out=$(sed -n \"s/^set output '\\(.*\\)'$/\\1/p\" | head -n 1)\n"
      "printf '\\211PNG half' > \"$out\"\nexit 1\n");
  write("old.png", "the previous plot");
  for (const auto& args :
       {std::vector<std::string>{"freq", rc, "--plot", path("old.png"), "--quiet"},
        std::vector<std::string>{"modes", sw, "--plot", path("old.png")},
        std::vector<std::string>{"run", rc, "--plot", path("old.png"), "--quiet"}}) {
    const ProcessResult r = run_ringdown(args, {{"PATH", half}});
    EXPECT_EQ(r.exit_code, kBadInput) << args[0] << "\n" << r.err;
    EXPECT_NE(r.err.find("gnuplot did not produce a valid file"), std::string::npos) << r.err;
    EXPECT_EQ(read_all(path("old.png")), "the previous plot")
        << args[0] << ": the target is untouched";
    EXPECT_TRUE(hidden_files().empty()) << args[0];
  }
  fs::remove(dir_ / "fakebin" / "gnuplot");
  const std::string early = fake_gnuplot("exit 1\n");
  for (const auto& args :
       {std::vector<std::string>{"freq", rc, "--plot", path("new.svg"), "--quiet"},
        std::vector<std::string>{"modes", sw, "--plot", path("new.pdf")}}) {
    const ProcessResult r = run_ringdown(args, {{"PATH", early}});
    EXPECT_EQ(r.exit_code, kBadInput) << args[0] << "\n" << r.err;
    EXPECT_NE(r.err.find("gnuplot"), std::string::npos) << r.err;
    EXPECT_EQ(r.signal, 0) << "no SIGPIPE death";
  }
  EXPECT_FALSE(fs::exists(path("new.svg")));
  EXPECT_FALSE(fs::exists(path("new.pdf")));
  EXPECT_TRUE(hidden_files().empty());
}

// --- helpers ------------------------------------------------------------------

TEST(PlotHelpers, SiTickLabels) {
  // SI Brochure 2019, table 7: prefixes in steps of 10^3.
  using ringdown::cli::si_tick_label;
  EXPECT_EQ(si_tick_label(1000, true), "1k");
  EXPECT_EQ(si_tick_label(5e-7, true), "500n");
  EXPECT_EQ(si_tick_label(2e-6, true), "2u");
  EXPECT_EQ(si_tick_label(2e-6, false), "2\xC2\xB5");
  EXPECT_EQ(si_tick_label(100, true), "100");
  EXPECT_EQ(si_tick_label(1e6, true), "1M");
  EXPECT_EQ(si_tick_label(-2e-3, true), "-2m");
  EXPECT_EQ(si_tick_label(0, true), "0");
}

TEST(PlotHelpers, LogTicksPickDecadesOrFinerSteps) {
  // Decades when the range holds two or more, else 1-2-5, else every digit
  // (common practice, no source).
  using ringdown::cli::log_ticks;
  const auto wide = log_ticks(1e3, 1e7);
  EXPECT_EQ(wide.labelled, (std::vector<double>{1e3, 1e4, 1e5, 1e6, 1e7}));
  EXPECT_EQ(wide.minor.size(), 4u * 8u);  // 2..9 in each of four decades
  const auto narrow = log_ticks(1.5e5, 9e5);
  EXPECT_EQ(narrow.labelled, (std::vector<double>{2e5, 5e5}));
  const auto tight = log_ticks(3.5e5, 6.5e5);
  EXPECT_EQ(tight.labelled, (std::vector<double>{4e5, 5e5, 6e5}));
  EXPECT_TRUE(log_ticks(1e3, 1e3).labelled.empty());
}

TEST(PlotHelpers, LogarithmicRadiusOnlyForSpreadPoles) {
  using ringdown::cli::PoleSet;
  using C = std::complex<double>;
  // kLinearSpread = 100: a ratio of natural frequencies up to 100 stays linear.
  EXPECT_FALSE(ringdown::cli::logarithmic_radius(
      {PoleSet{"a", {C(-1e3, 3e3), C(-1e3, -3e3)}}, PoleSet{"b", {C(-5e4, 0)}}}));
  EXPECT_TRUE(
      ringdown::cli::logarithmic_radius({PoleSet{"a", {C(-1, 0)}}, PoleSet{"b", {C(-1e3, 0)}}}));
  // A zero pole has no magnitude to compare.
  EXPECT_FALSE(ringdown::cli::logarithmic_radius({PoleSet{"a", {C(0, 0), C(-1e3, 0)}}}));
}

TEST(PlotHelpers, TextPanelsGetWholeRows) {
  // 30 lines: rows 0..29; title on 29, tick labels and x label on 1 and 0,
  // so 27 rows for panels, 9 each with their borders.
  const auto frames = ringdown::cli::stack_panels({1, 1, 1}, true, 30, 0);
  ASSERT_EQ(frames.size(), 3u);
  for (const auto& f : frames) EXPECT_EQ(f.data_rows, 7);
  EXPECT_TRUE(frames.back().lowest);
  EXPECT_FALSE(frames.front().lowest);
  // Each border on its own row: screen y = (row + 0.25) / 29.
  EXPECT_NEAR(frames[0].top * 29, 28.25, 1e-9);
  EXPECT_NEAR(frames[2].bottom * 29, 2.25, 1e-9);
  EXPECT_NEAR(frames[0].bottom * 29 - frames[1].top * 29, 1.0, 1e-9);
}

}  // namespace

// --- histograms of trials (--histogram; cli/histogram_plot.hpp) ------------------------

// An RC charged to 1 V whose R (10 %) and C (20 %) are drawn 40 times: tau = R C spreads, and
// so does the 10-90 % rise time, 2.197 tau (ln 9, first-order step response; from memory).
// The expect's limit (3 ms) is drawn as a line in the rise time's panel.
constexpr const char* kToleranced = R"(title "Toleranced RC for histograms"
voltage   V1 in gnd step(from=0, to=1V, at=0)
resistor  R1 in out 1k tol=10%
capacitor C1 out gnd 1uF tol=20%
transient until=20m every=20u
record out
report tr = rise(out)
report vmid = at(out, 2ms)
expect rise(out) < 3ms
trials runs=40 seed=3
)";

TEST_F(PlotCli, HistogramFilesAreComplete) {
  const std::string file = write("rc.rlc", kToleranced);
  for (const char* extension : {"png", "svg", "pdf"}) {
    const std::string target = path(std::string("hist.") + extension);
    const ProcessResult r = run_ringdown({"run", file, "--histogram", target, "--quiet", "--jobs", "2"});
    ASSERT_EQ(r.exit_code, kOk) << extension << "\n" << r.err;
    const std::string bytes = read_all(target);
    expect_complete(bytes, extension);
    if (std::string(extension) == "svg") {
      // The title, one panel per report labelled with its figure and SI-prefixed unit, the
      // count axis, and the expect's limit on the rise time's panel.
      for (const char* text : {"Toleranced RC for histograms", "tr = rise(out) (ms)", "vmid = at(out, 2ms) (mV)",
                               "trials", "limit &lt; 3 ms"})
        EXPECT_NE(bytes.find(text), std::string::npos) << text;
    }
  }
  EXPECT_TRUE(hidden_files().empty());
}

TEST_F(PlotCli, HistogramTerminalPlotFits) {
  const std::string file = write("rc.rlc", kToleranced);
  const ProcessResult r = run_ringdown({"run", file, "--histogram", "term", "--quiet"},
                                       {{"COLUMNS", "90"}, {"LINES", "40"}});
  ASSERT_EQ(r.exit_code, kOk) << r.err;
  const std::vector<std::string> plot = plot_lines(r.out, "Toleranced RC for histograms");
  expect_fits(plot, 90, 40, "histogram");
  EXPECT_NE(r.out.find("tr = rise(out) (ms)"), std::string::npos) << r.out;
  EXPECT_NE(r.out.find("vmid = at(out, 2ms) (mV)"), std::string::npos) << r.out;
}

TEST_F(PlotCli, HistogramNeedsTrialsAndItsOwnTarget) {
  const std::string plain = write("plain.rlc", kLowPass);
  ProcessResult r = run_ringdown({"run", plain, "--histogram", path("h.png"), "--quiet"});
  EXPECT_EQ(r.exit_code, kBadInput);
  EXPECT_NE(r.err.find("no trials statement"), std::string::npos) << r.err;
  const std::string file = write("rc.rlc", kToleranced);
  r = run_ringdown({"run", file, "--histogram", "term", "--plot", "term", "--quiet"});
  EXPECT_EQ(r.exit_code, kBadInput);
  EXPECT_NE(r.err.find("both draw on the terminal"), std::string::npos) << r.err;
  r = run_ringdown({"run", file, "--histogram", path("h.jpg"), "--quiet"});
  EXPECT_EQ(r.exit_code, kBadInput);
  EXPECT_FALSE(fs::exists(path("h.png")));
  EXPECT_FALSE(fs::exists(path("h.jpg")));
  EXPECT_TRUE(hidden_files().empty());
}

// The bins: ceil(sqrt(n)) equal bins within [5, 40] (the square-root choice; common practice,
// no source) over the values of every point, the maximum counted in the last bin.
TEST(HistogramBins, SquareRootChoiceOverEveryPoint) {
  using ringdown::cli::histogram_counts;
  using ringdown::cli::histogram_edges;
  std::vector<double> a, b;
  for (int i = 0; i < 100; ++i) a.push_back(i);           // 0..99
  for (int i = 0; i < 100; ++i) b.push_back(50 + i);      // 50..149
  const std::vector<double> edges = histogram_edges({a, b});
  ASSERT_EQ(edges.size(), 11u);  // sqrt(100) = 10 bins
  EXPECT_DOUBLE_EQ(edges.front(), 0);
  EXPECT_DOUBLE_EQ(edges.back(), 149);
  const std::vector<long> ca = histogram_counts(a, edges), cb = histogram_counts(b, edges);
  long total = 0;
  for (long c : ca) total += c;
  EXPECT_EQ(total, 100);
  EXPECT_EQ(cb.back(), 15);  // 134.1..149 holds 135..149
  EXPECT_EQ(ca.back(), 0);
  EXPECT_EQ(histogram_edges({{1, 2, 3}}).size(), 6u);  // at least 5 bins
  const std::vector<double> one = histogram_edges({{2.0, 2.0}});
  ASSERT_EQ(one.size(), 2u);  // one value: one bin around it
  EXPECT_EQ(histogram_counts({2.0, 2.0}, one), std::vector<long>{2});
  EXPECT_TRUE(histogram_edges({{}}).empty());
}
