// See inspect.hpp. Output is plain aligned text on stdout, one section per
// kind of thing, in the order a reader checks a schematic: what is connected
// where, with which values, driven by what, asked to compute what.
#include "cli/inspect.hpp"

#include <CLI/CLI.hpp>
#include <algorithm>
#include <cerrno>
#include <cmath>
#include <cstdio>
#include <cstring>
#include <fstream>
#include <string>
#include <vector>

#include "cli/console.hpp"
#include "cli/exit_codes.hpp"
#include "parser/load.hpp"
#include "parser/units.hpp"

namespace ringdown::cli {

namespace {

// Corner times listed per waveform before "... and N more" (enough to see a
// pulse train's pattern without flooding the screen; common practice).
constexpr std::size_t kCornersShown = 8;
// Without a transient statement, corners are looked for up to this horizon,
// growing by a decade at a time until a few are found.
constexpr double kFirstHorizon = 1e-9;
constexpr double kLastHorizon = 1e3;

// Left-aligned columns separated by two blanks.
class Table {
 public:
  void add(std::vector<std::string> row) { rows_.push_back(std::move(row)); }
  void print(const std::string& indent) const {
    std::vector<std::size_t> width;
    for (const auto& row : rows_) {
      if (width.size() < row.size()) width.resize(row.size(), 0);
      for (std::size_t i = 0; i < row.size(); ++i) width[i] = std::max(width[i], display_width(row[i]));
    }
    for (const auto& row : rows_) {
      std::string line = indent;
      for (std::size_t i = 0; i < row.size(); ++i) {
        line += row[i];
        if (i + 1 < row.size()) line.append(width[i] - display_width(row[i]) + 2, ' ');
      }
      while (!line.empty() && line.back() == ' ') line.pop_back();
      std::printf("%s\n", line.c_str());
    }
  }

 private:
  // Characters on screen: UTF-8 continuation bytes take no column (so µ, Ω align).
  static std::size_t display_width(const std::string& s) {
    return static_cast<std::size_t>(std::count_if(
        s.begin(), s.end(), [](char c) { return (static_cast<unsigned char>(c) & 0xC0u) != 0x80u; }));
  }
  std::vector<std::vector<std::string>> rows_;
};

std::string si(double value, const Unit& unit) {
  return format_si(value, unit ? unit_symbol(*unit) : std::string());
}

std::string node_name(const Circuit& c, int index) {
  if (index < 0 || index >= static_cast<int>(c.nodes.size())) return "?";
  return c.nodes[static_cast<std::size_t>(index)].name;
}

std::string percent(double fraction) {
  char text[32];
  std::snprintf(text, sizeof text, "%.4g%%", fraction * 100);
  return text;
}

// The unit of a part's rating (NETLIST.md section 4: V for a capacitor, W for
// a resistor, A for an inductor).
std::string rating_unit(ElementKind kind) {
  switch (kind) {
    case ElementKind::Capacitor: return "V";
    case ElementKind::Resistor: return "W";
    case ElementKind::Inductor: return "A";
    default: return "";
  }
}

// Value column of one element: its own value in SI, or its waveform.
std::string element_value(const Circuit& c, const Element& e) {
  auto through = [&]() {
    return e.through >= 0 && e.through < static_cast<int>(c.elements.size())
               ? c.elements[static_cast<std::size_t>(e.through)].name
               : std::string("?");
  };
  auto control = [&]() {
    return "control=(" + node_name(c, e.control_p) + ", " + node_name(c, e.control_n) + ")";
  };
  switch (e.kind) {
    case ElementKind::Resistor: return format_si(e.value, "Ohm");
    case ElementKind::Capacitor: return format_si(e.value, "F");
    case ElementKind::Inductor: return format_si(e.value, "H");
    case ElementKind::VoltageSource:
    case ElementKind::CurrentSource: {
      if (!e.waveform) return "?";
      // A constant source describes itself as a bare number; show it in SI with
      // the unit its kind gives it ("48 V"). Calls and sums are shown as written.
      std::string text = e.waveform->describe();
      if (text.find('(') == std::string::npos && e.waveform->is_exact() &&
          e.waveform->value_before_zero() == e.waveform->value(0.0)) {
        return format_si(e.waveform->value(0.0),
                         e.kind == ElementKind::VoltageSource ? "V" : "A");
      }
      return text;
    }
    case ElementKind::Vcvs: return control() + " gain=" + format_si(e.value, "");
    case ElementKind::Vccs: return control() + " gain=" + format_si(e.value, "S");
    case ElementKind::Ccvs: return "through=" + through() + " gain=" + format_si(e.value, "Ohm");
    case ElementKind::Cccs: return "through=" + through() + " gain=" + format_si(e.value, "");
    case ElementKind::Switch:
      return "gate=" + (e.waveform ? e.waveform->describe() : std::string("?")) +
             " closed=" + format_si(e.closed, "Ohm") + " open=" + format_si(e.open, "Ohm");
  }
  return "?";
}

std::string attributes(const Part& p, const Element* main) {
  std::vector<std::string> out;
  if (main && main->v0) out.push_back("v0=" + format_si(*main->v0, "V"));
  if (main && main->i0) out.push_back("i0=" + format_si(*main->i0, "A"));
  if (p.tol) out.push_back("tol=" + percent(*p.tol));
  if (p.rated) out.push_back("rated=" + format_si(*p.rated, rating_unit(p.kind)));
  std::string text;
  for (const auto& s : out) text += (text.empty() ? "" : " ") + s;
  return text;
}

std::string join_times(const std::vector<double>& times, std::size_t shown) {
  std::string text;
  for (std::size_t i = 0; i < std::min(shown, times.size()); ++i)
    text += (i ? ", " : "") + format_si(times[i], "s");
  if (times.size() > shown) text += ", ... and " + std::to_string(times.size() - shown) + " more";
  return text;
}

void print_waveforms(const Circuit& c) {
  std::vector<const Element*> driven;
  for (const Element& e : c.elements)
    if (e.waveform) driven.push_back(&e);
  if (driven.empty()) return;
  std::printf("\nWaveforms\n");
  for (const Element* e : driven) {
    const std::string label = e->kind == ElementKind::Switch ? e->name + " gate" : e->name;
    std::printf("  %s: %s\n", label.c_str(), e->waveform->describe().c_str());
    if (!e->waveform->is_exact())
      std::printf("    not exact between corners: fitted piecewise by the engine\n");
    std::vector<double> corners;
    std::string window;
    if (c.transient) {
      corners = e->waveform->corners(c.transient->until);
      window = "in (0, " + format_si(c.transient->until, "s") + "]";
    } else {
      // No run length: widen the horizon a decade at a time until a few
      // corners show (a periodic source has infinitely many).
      double horizon = kFirstHorizon;
      while (horizon <= kLastHorizon) {
        corners = e->waveform->corners(horizon);
        if (corners.size() >= kCornersShown) break;
        horizon *= 10;
      }
      window = "first ones";
    }
    if (corners.empty()) std::printf("    corners %s: none\n", window.c_str());
    else std::printf("    corners %s: %s\n", window.c_str(), join_times(corners, kCornersShown).c_str());
  }
}

void print_circuit(const Circuit& c) {
  std::printf("%s\n", c.title.empty() ? "(no title)" : c.title.c_str());
  std::printf("  file  %s\n", c.file.c_str());

  // Nodes.
  std::size_t hidden_nodes = 0;
  for (const Node& n : c.nodes) hidden_nodes += n.hidden;
  std::printf("\nNodes (%zu", c.nodes.size());
  if (hidden_nodes) std::printf(", %zu hidden", hidden_nodes);
  std::printf(")\n");
  Table nodes;
  for (const Node& n : c.nodes) {
    std::string note;
    if (&n == &c.nodes.front()) note = "ground";
    if (n.hidden) {
      const auto hash = n.name.find('#');
      note = "hidden, inside " + (hash == std::string::npos ? n.name : n.name.substr(0, hash));
    }
    nodes.add({n.name, note});
  }
  nodes.print("  ");

  // Parts and their elements.
  std::printf("\nParts (%zu, %zu primitive elements)\n", c.parts.size(), c.elements.size());
  Table parts;
  parts.add({"name", "kind", "nodes", "value", "attributes"});
  for (const Part& p : c.parts) {
    const Element* main = p.main >= 0 && p.main < static_cast<int>(c.elements.size())
                              ? &c.elements[static_cast<std::size_t>(p.main)]
                              : nullptr;
    parts.add({p.name, kind_name(p.kind), node_name(c, p.a) + " " + node_name(c, p.b),
               main ? element_value(c, *main) : "", attributes(p, main)});
    for (int index : p.elements) {
      if (index == p.main || index < 0 || index >= static_cast<int>(c.elements.size())) continue;
      const Element& e = c.elements[static_cast<std::size_t>(index)];
      parts.add({"  " + e.name, kind_name(e.kind), node_name(c, e.a) + " " + node_name(c, e.b),
                 element_value(c, e), e.hidden ? "hidden" : ""});
    }
  }
  parts.print("  ");

  print_waveforms(c);

  if (!c.couplings.empty()) {
    std::printf("\nCouplings\n");
    Table t;
    for (const Coupling& k : c.couplings) {
      std::string names;
      for (int i : k.inductors)
        names += (names.empty() ? "" : ", ") +
                 (i >= 0 && i < static_cast<int>(c.elements.size()) ? c.elements[static_cast<std::size_t>(i)].name
                                                                    : std::string("?"));
      char kk[32];
      std::snprintf(kk, sizeof kk, "k=%.6g", k.k);
      t.add({k.name, "(" + names + ")", kk});
    }
    t.print("  ");
  }

  if (!c.parameters.empty()) {
    std::printf("\nParameters\n");
    Table t;
    for (const Parameter& p : c.parameters)
      t.add({p.name, "= " + si(p.value, p.unit), p.unit ? unit_description(*p.unit) : "no unit",
             "(" + p.text + ")"});
    t.print("  ");
  }

  std::printf("\nAnalyses\n");
  bool any = false;
  if (c.transient) {
    std::printf("  transient  until=%s every=%s initial=%s\n", format_si(c.transient->until, "s").c_str(),
                format_si(c.transient->every, "s").c_str(), c.transient->initial_dc ? "dc" : "zero");
    any = true;
  }
  if (c.frequency) {
    std::printf("  frequency  from=%s to=%s per_decade=%d input=%s\n", format_si(c.frequency->from, "Hz").c_str(),
                format_si(c.frequency->to, "Hz").c_str(), c.frequency->per_decade, c.frequency->input.c_str());
    any = true;
  }
  if (c.modes) std::printf("  modes\n"), any = true;
  for (const SweepRequest& s : c.sweeps) {
    std::printf("  sweep      %s = %s (%zu values)\n", s.parameter.c_str(), s.text.c_str(), s.values.size());
    any = true;
  }
  if (c.trials) {
    const char* spread = c.trials->spread == Spread::Uniform  ? "uniform"
                         : c.trials->spread == Spread::Normal ? "normal"
                                                              : "corners";
    std::printf("  trials     runs=%ld seed=%llu spread=%s yield=%s\n", c.trials->runs, c.trials->seed, spread,
                percent(c.trials->yield).c_str());
    any = true;
  }
  if (!any) std::printf("  none\n");

  if (!c.records.empty()) {
    std::printf("\nRecords\n");
    Table t;
    for (const Signal& s : c.records) t.add({s.name, s.unit ? unit_symbol(*s.unit) : "(unit unknown)"});
    t.print("  ");
  }
  if (!c.reports.empty()) {
    std::printf("\nReports\n");
    Table t;
    for (const Report& r : c.reports) t.add({r.name, "= " + r.figure.text});
    t.print("  ");
  }
  if (!c.expects.empty()) {
    std::printf("\nExpects\n");
    for (const Expect& e : c.expects) std::printf("  %s\n", e.text.c_str());
  }

  std::string states;
  std::size_t count = 0;
  for (const Element& e : c.elements) {
    if (e.kind == ElementKind::Capacitor) states += (count++ ? ", " : "") + e.name + ".vc";
    if (e.kind == ElementKind::Inductor) states += (count++ ? ", " : "") + e.name + ".il";
  }
  std::printf("\nEnergy-storing elements (%zu)\n  %s\n", count, count ? states.c_str() : "none");
}

}  // namespace

CLI::App* setup_inspect(CLI::App& app, InspectOptions& options) {
  CLI::App* cmd = app.add_subcommand(
      "inspect", "Show the elaborated circuit: nodes, parts with SI values, waveforms, warnings");
  cmd->add_option("FILE", options.file, "circuit file (.rlc)")->required();
  return cmd;
}

int run_inspect(const InspectOptions& options) {
  if (!readable_or_report(options.file)) return kExitBadInput;
  const LoadResult loaded = load_file(options.file);
  if (!loaded.ok()) {
    print_diagnostics(loaded.diagnostics);
    return kExitBadInput;
  }
  print_circuit(*loaded.circuit);
  int warnings = 0;
  for (const Diagnostic& d : loaded.diagnostics) warnings += d.severity == Severity::Warning;
  std::printf("\nWarnings: %d%s\n", warnings, warnings ? " (on stderr)" : "");
  std::fflush(stdout);
  print_diagnostics(loaded.diagnostics);
  return kExitOk;
}

}  // namespace ringdown::cli
