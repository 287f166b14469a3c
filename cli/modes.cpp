// See modes.hpp. Output is plain aligned text on stdout, one table per
// switch configuration; diagnostics go to stderr through cli/console.hpp.
#include "cli/modes.hpp"

#include <CLI/CLI.hpp>
#include <algorithm>
#include <cerrno>
#include <cmath>
#include <cstdio>
#include <cstring>
#include <fstream>
#include <optional>
#include <string>
#include <vector>

#include "cli/console.hpp"
#include "cli/exit_codes.hpp"
#include "cli/pole_plot.hpp"
#include "parser/load.hpp"
#include "parser/units.hpp"

namespace ringdown::cli {

namespace {

// Parts named per mode: at most three (issue 5: "the two or three elements
// that take part most"), and only those with at least 5 % of the mode, since
// a part with a few percent does not set the mode (a reading choice, common
// practice, no source). The first is always named.
constexpr std::size_t kPartsListed = 3;
constexpr double kShareListed = 0.05;
// Above this estimate of cond(V) the eigenvectors, and with them the
// participation factors, are sensitive to rounding: an eigenvalue is (nearly)
// repeated without a full set of eigenvectors, e.g. critical damping
// (eigenvalue sensitivity ~ cond(V) eps, Golub & Van Loan, Matrix
// Computations, 2013, sec. 7.2; from memory). 1e8 leaves about 8 digits.
constexpr double kIllConditioned = 1e8;
// Significant digits of the table's values: enough to tell 31.22 kHz from
// 31.83 kHz (damped from natural) without a wall of digits.
constexpr int kDigits = 4;

// Left-aligned columns separated by two blanks (as in inspect.cpp).
class Table {
 public:
  void add(std::vector<std::string> row) { rows_.push_back(std::move(row)); }
  std::string text(const std::string& indent) const {
    std::vector<std::size_t> width;
    for (const auto& row : rows_) {
      if (width.size() < row.size()) width.resize(row.size(), 0);
      for (std::size_t i = 0; i < row.size(); ++i)
        width[i] = std::max(width[i], display_width(row[i]));
    }
    std::string out;
    for (const auto& row : rows_) {
      std::string line = indent;
      for (std::size_t i = 0; i < row.size(); ++i) {
        line += row[i];
        if (i + 1 < row.size()) line.append(width[i] - display_width(row[i]) + 2, ' ');
      }
      while (!line.empty() && line.back() == ' ') line.pop_back();
      out += line + '\n';
    }
    return out;
  }

 private:
  // Characters on screen: UTF-8 continuation bytes take no column.
  static std::size_t display_width(const std::string& s) {
    return static_cast<std::size_t>(std::count_if(s.begin(), s.end(), [](char c) {
      return (static_cast<unsigned char>(c) & 0xC0u) != 0x80u;
    }));
  }
  std::vector<std::vector<std::string>> rows_;
};

std::string percent(double share) {
  char text[32];
  std::snprintf(text, sizeof text, "%.0f%%", share * 100);
  return text;
}

std::string parts_column(const solver::Mode& m) {
  std::string out;
  for (std::size_t i = 0; i < m.parts.size() && i < kPartsListed; ++i) {
    if (i > 0 && m.parts[i].share < kShareListed) break;
    out += (i ? ", " : "") + m.parts[i].name + " " + percent(m.parts[i].share);
  }
  return out.empty() ? "-" : out;
}

std::string configuration_label(const solver::ConfigurationModes& cm) {
  std::string out = "from t = " + format_si(cm.from, "s", kDigits);
  for (std::size_t k = 0; k < cm.closed.size(); ++k)
    out += std::string(k ? ", " : ": ") + cm.switch_names[k] + (cm.closed[k] ? " closed" : " open");
  return out;
}

// The pole map's sets: one per configuration, both poles of a pair.
std::vector<PoleSet> pole_sets(const solver::ModesResult& result) {
  std::vector<PoleSet> sets;
  const std::size_t count = result.configurations.size();
  for (std::size_t c = 0; c < count; ++c) {
    const solver::ConfigurationModes& cm = result.configurations[c];
    PoleSet set;
    if (count == 1 && cm.closed.empty()) {
      set.label = "poles";
    } else {
      for (std::size_t k = 0; k < cm.closed.size(); ++k)
        set.label += (k ? ", " : "") + cm.switch_names[k] + (cm.closed[k] ? " closed" : " open");
      set.label += " (from " + format_si(cm.from, "s", kDigits) + ")";
    }
    for (const solver::Mode& m : cm.modes) {
      set.poles.push_back(m.pole);
      if (m.kind == solver::ModeKind::Oscillating) set.poles.push_back(std::conj(m.pole));
    }
    sets.push_back(std::move(set));
  }
  return sets;
}

std::string trim(const std::string& s) {
  const auto b = s.find_first_not_of(" \t");
  if (b == std::string::npos) return {};
  return s.substr(b, s.find_last_not_of(" \t") - b + 1);
}

}  // namespace

std::string format_modes(const Circuit& circuit, const solver::ModesResult& result) {
  std::string out = "Natural modes";
  if (!circuit.title.empty()) out += ": " + circuit.title;
  out += "\n";
  out += "States: " + std::to_string(result.state_names.size());
  if (!result.state_names.empty()) {
    out += " (";
    for (std::size_t i = 0; i < result.state_names.size(); ++i)
      out += (i ? ", " : "") + result.state_names[i];
    out += ")";
  }
  out += "\n";
  const std::size_t count = result.configurations.size();
  for (std::size_t c = 0; c < count; ++c) {
    const solver::ConfigurationModes& cm = result.configurations[c];
    out += "\nConfiguration " + std::to_string(c + 1) + " of " + std::to_string(count) + ", " +
           configuration_label(cm) + "\n";
    if (cm.modes.empty()) {
      out += "  no energy-storing elements: no natural modes\n";
      continue;
    }
    Table t;
    t.add({"#", "damped freq", "natural freq", "zeta", "Q", "time const", "parts (share)", "note"});
    int growing = 0;
    for (std::size_t i = 0; i < cm.modes.size(); ++i) {
      const solver::Mode& m = cm.modes[i];
      std::vector<std::string> row{std::to_string(i + 1)};
      std::string note;
      if (m.kind == solver::ModeKind::Oscillating) {
        row.push_back(format_si(m.damped_hz, "Hz", kDigits));
        row.push_back(format_si(m.natural_hz, "Hz", kDigits));
        row.push_back(format_si(m.damping_ratio, "", kDigits));
        row.push_back(std::isinf(m.q) ? "inf" : format_si(m.q, "", kDigits));
      } else {
        row.insert(row.end(), {"-", "-", "-", "-"});
      }
      if (m.kind == solver::ModeKind::Constant) {
        row.push_back("inf");
        note = "zero pole (conserved)";
      } else {
        row.push_back(std::isinf(m.time_constant) ? "inf"
                                                  : format_si(m.time_constant, "s", kDigits));
        if (m.kind == solver::ModeKind::Oscillating && m.damping_ratio == 0) note = "undamped";
      }
      if (m.growing) {
        note = "GROWING";
        ++growing;
      }
      row.push_back(parts_column(m));
      row.push_back(note);
      t.add(std::move(row));
    }
    out += t.text("  ");
    if (growing > 0)
      out += "  " + std::to_string(growing) + (growing == 1 ? " mode grows" : " modes grow") +
             " (negative damping: time constant < 0 is the e-folding time of the growth)\n";
    if (cm.eigenvector_condition > kIllConditioned)
      out +=
          std::isinf(cm.eigenvector_condition)
              ? "  note: a repeated pole without a full set of eigenvectors (critical damping?): "
                "the participation shares are not well determined\n"
              : "  note: nearly repeated poles (eigenvector condition " +
                    format_si(cm.eigenvector_condition, "", 2) +
                    "): the participation shares are not well determined\n";
  }
  return out;
}

CLI::App* setup_modes(CLI::App& app, ModesOptions& options) {
  CLI::App* cmd = app.add_subcommand(
      "modes", "Natural modes: frequency, damping ratio, Q, time constant, main parts");
  cmd->add_option("FILE", options.file, "circuit file (.rlc)")->required();
  cmd->add_option("--set", options.set, "override a parameter (repeatable)")
      ->type_name("NAME=VALUE")
      ->allow_extra_args(false);
  cmd->add_option("--plot", options.plot, "pole map: term, or PATH.png|.svg|.pdf")
      ->type_name("TARGET");
  cmd->add_flag("--strict", options.strict, "treat warnings as errors (exit 2)");
  return cmd;
}

int run_modes(const ModesOptions& options) {
  std::optional<PlotTarget> plot_target;
  if (!options.plot.empty() && !(plot_target = plot_target_or_report(options.plot, false)))
    return kExitBadInput;
  if (!readable_or_report(options.file)) return kExitBadInput;
  LoadOptions load_options;
  for (const std::string& entry : options.set) {
    const auto eq = entry.find('=');
    if (eq == std::string::npos || trim(entry.substr(0, eq)).empty() ||
        trim(entry.substr(eq + 1)).empty()) {
      print_error("--set takes NAME=VALUE, got '" + entry + "'",
                  "for example --set Rsn=47 or --set Csw=100pF");
      return kExitBadInput;
    }
    load_options.overrides.emplace_back(trim(entry.substr(0, eq)), trim(entry.substr(eq + 1)));
  }
  const LoadResult loaded = load_file(options.file, load_options);
  if (!loaded.ok()) {
    print_diagnostics(loaded.diagnostics, options.strict);
    return kExitBadInput;
  }
  Diagnostics diagnostics = loaded.diagnostics;
  solver::ModesOptions solver_options;
  solver_options.strict = options.strict;
  const solver::ModesResult result =
      solver::compute_modes(*loaded.circuit, solver_options, diagnostics);
  const DiagnosticCounts counts = print_diagnostics(diagnostics, options.strict);
  if (!result.ok) return result.numerical_failure ? kExitNumerical : kExitBadInput;
  if (counts.errors > 0) return kExitBadInput;
  const std::string text = format_modes(*loaded.circuit, result);
  std::fwrite(text.data(), 1, text.size(), stdout);
  std::fflush(stdout);
  if (plot_target) {
    if (plot_target->text()) std::fputc('\n', stdout);
    PoleMapRequest request;
    request.target = *plot_target;
    request.title = loaded.circuit->title.empty() ? loaded.circuit->file : loaded.circuit->title;
    request.sets = pole_sets(result);
    std::string error;
    if (!draw_pole_map(request, error)) {
      print_error(error);
      return kExitBadInput;
    }
  }
  return kExitOk;
}

}  // namespace ringdown::cli
