// `ringdown compare`: see compare.hpp.
#include "cli/compare.hpp"

#include <CLI/CLI.hpp>
#include <algorithm>
#include <cerrno>
#include <cmath>
#include <cstdio>
#include <cstring>
#include <map>
#include <memory>
#include <nlohmann/json.hpp>
#include <optional>

#include "cli/atomic_file.hpp"
#include "cli/console.hpp"
#include "cli/exit_codes.hpp"
#include "cli/plot.hpp"
#include "cli/quantity.hpp"
#include "cli/report.hpp"
#include "parser/csv.hpp"
#include "parser/units.hpp"
#include "solver/figures.hpp"
#include "solver/sampled_trajectory.hpp"

namespace ringdown::cli {

namespace {

// Digits of the side-by-side table (as the run summary's figures).
constexpr int kDigits = 5;

struct Side {
  std::string label;  // "A", "B", "measured"
  std::string file;
  std::optional<solver::FigureValue> value;
};

struct Row {
  std::string name;    // report name or expect text
  std::string figure;  // the figure as written
  const FigureCall* call = nullptr;
  std::optional<solver::FigureValue> a, b;
  std::optional<bool> pass_a, pass_b;  // expects only
};

std::string value_text(const Row& row, const std::optional<solver::FigureValue>& v) {
  if (!v) return "-";
  if (!v->ok) return "error";
  return figure_text(*row.call, *v);
}

// B - A and the relative change, when both are numbers in the same unit.
std::pair<std::string, std::string> difference_text(const Row& row) {
  if (!row.a || !row.b || !row.a->ok || !row.b->ok) return {"-", "-"};
  solver::FigureValue d = *row.b;
  d.value = row.b->value - row.a->value;
  d.note.clear();
  const std::string diff = figure_text(*row.call, d);
  if (row.a->value == 0) return {diff, row.b->value == 0 ? "0 %" : "-"};
  char rel[32];
  std::snprintf(rel, sizeof rel, "%+.3g %%", 100 * d.value / std::abs(row.a->value));
  return {diff, rel};
}

// --map drain=CH1,Lk.i=CH2 (each occurrence may hold several).
bool parse_map(const std::vector<std::string>& entries, std::vector<std::pair<std::string, std::string>>& out) {
  for (const std::string& entry : entries)
    for (const std::string& item : split_signal_list(entry)) {
      const auto eq = item.find('=');
      if (eq == std::string::npos || eq == 0 || eq + 1 == item.size()) {
        print_error("--map takes SIGNAL=COLUMN, got '" + item + "'", "for example --map drain=CH1,Lk.i=CH2");
        return false;
      }
      out.emplace_back(item.substr(0, eq), item.substr(eq + 1));
    }
  return true;
}

CsvColumn column_of(const std::string& text) {
  if (!text.empty() && std::all_of(text.begin(), text.end(), [](char c) { return c >= '0' && c <= '9'; }))
    return std::stoi(text);
  return text;
}

// The capture as a trajectory: one signal per --map entry, in that order.
std::unique_ptr<solver::SampledTrajectory> read_capture(const CompareOptions& o,
                                                        const std::vector<std::pair<std::string, std::string>>& map,
                                                        double offset) {
  std::vector<double> time;
  std::vector<std::vector<double>> values;
  for (const auto& [signal, column] : map) {
    Diagnostics d;
    const auto samples = read_samples(o.measured, column_of(o.time_column), column_of(column), 1.0, d);
    if (!samples) {
      print_diagnostics(d);
      return nullptr;
    }
    if (samples->size() < 2) {
      print_error("'" + o.measured + "': column " + column + " has fewer than two samples");
      return nullptr;
    }
    std::vector<double> t, v;
    for (const auto& [ts, vs] : *samples) {
      t.push_back(ts + offset);
      v.push_back(vs);
    }
    if (time.empty()) {
      time = std::move(t);
    } else if (t != time) {
      print_error("'" + o.measured + "': column " + column + " does not share the time base of the first mapped column",
                  "every mapped column needs a value in every row");
      return nullptr;
    }
    values.push_back(std::move(v));
  }
  return std::make_unique<solver::SampledTrajectory>(std::move(time), std::move(values));
}


nlohmann::json value_json(const std::optional<solver::FigureValue>& v) {
  if (!v) return nullptr;
  nlohmann::json o{{"ok", v->ok}};
  if (v->ok) {
    o["value"] = v->value;
    o["unit"] = v->unit ? unit_symbol(*v->unit) : "";
  } else {
    o["error"] = v->error;
  }
  return o;
}

}  // namespace

CLI::App* setup_compare(CLI::App& app, CompareOptions& o) {
  CLI::App* cmd = app.add_subcommand(
      "compare", "Run two revisions of a circuit (or a circuit and a measured capture) and show their figures side by side");
  cmd->add_option("FILE", o.files, "circuit files: A.rlc B.rlc, or one file with --measured")->required()->expected(1, 2);
  add_shared_flags(cmd, o.run);
  cmd->add_option("--measured", o.measured, "a measured capture (CSV with a time column) to compare with")
      ->type_name("DATA.csv");
  cmd->add_option("--map", o.map, "which capture column is which signal")->type_name("S=COLUMN,...")->allow_extra_args(false);
  cmd->add_option("--time-column", o.time_column, "the capture's time column: 1-based index or header name (default 1)")
      ->type_name("COLUMN");
  cmd->add_option("--time-offset", o.time_offset, "added to the capture's times, e.g. 4us (to align its trigger)")
      ->type_name("T");
  cmd->add_option("--plot", o.plot, "overlay the signals: term, or PATH.png|.svg|.pdf")->type_name("TARGET");
  return cmd;
}

int run_compare(const CompareOptions& o) {
  const bool measured = !o.measured.empty();
  if (measured && o.files.size() != 1) {
    print_error("compare --measured takes one circuit file, got " + std::to_string(o.files.size()));
    return kExitBadInput;
  }
  if (!measured && o.files.size() != 2) {
    print_error("compare takes two circuit files (A.rlc B.rlc), or one with --measured DATA.csv");
    return kExitBadInput;
  }
  std::vector<std::pair<std::string, std::string>> map;
  if (measured) {
    if (!parse_map(o.map, map)) return kExitBadInput;
    if (map.empty()) {
      print_error("--measured needs --map to say which column is which signal", "for example --map drain=CH1");
      return kExitBadInput;
    }
  } else if (!o.map.empty()) {
    print_error("--map goes with --measured");
    return kExitBadInput;
  }
  double offset = 0;
  if (!o.time_offset.empty()) {
    const QuantityResult q = parse_quantity(o.time_offset, "s");
    if (!q.value) {
      print_error("--time-offset: " + q.error, q.hint);
      return kExitBadInput;
    }
    offset = *q.value;
  }
  std::optional<PlotTarget> target;
  if (!o.plot.empty()) {
    std::string error;
    target = parse_plot_target(o.plot, error);
    if (!target) {
      print_error(error);
      return kExitBadInput;
    }
    if (!gnuplot_available()) {
      print_error("--plot needs gnuplot, which is not on PATH", "install the Debian package gnuplot-nox");
      return kExitBadInput;
    }
  }

  // --- Runs -------------------------------------------------------------------------------
  RunOptions ra = o.run;
  ra.file = o.files[0];
  SimulatedFile a = simulate_file(ra);
  if (a.exit_code != kExitOk) return a.exit_code;
  SimulatedFile b;
  std::unique_ptr<solver::SampledTrajectory> capture;
  if (measured) {
    capture = read_capture(o, map, offset);
    if (!capture) return kExitBadInput;
  } else {
    RunOptions rb = o.run;
    rb.file = o.files[1];
    b = simulate_file(rb);
    if (b.exit_code != kExitOk) return b.exit_code;
  }
  const Circuit& ca = *a.loaded->circuit;
  const std::string label_b = measured ? "measured" : "B";

  // --- Rows: reports by name, then expects by text ------------------------------------
  std::vector<Row> rows;
  const auto mapped = [&](const std::string& signal) -> std::optional<std::size_t> {
    for (std::size_t k = 0; k < map.size(); ++k)
      if (map[k].first == signal) return k;
    return std::nullopt;
  };
  // A figure on the capture, when its signal (or for energy/power, X.v and X.i) is mapped.
  const auto on_capture = [&](const FigureCall& call) -> std::optional<solver::FigureValue> {
    if (call.function == "energy" || call.function == "power") {
      if (call.part < 0) return std::nullopt;
      const std::string part = ca.parts[static_cast<std::size_t>(call.part)].name;
      const auto v = mapped(part + ".v"), i = mapped(part + ".i");
      if (!v || !i) return std::nullopt;
      return solver::evaluate_figure(call, *capture, 0, std::make_pair(*v, *i));
    }
    if (!call.signal) return std::nullopt;
    const auto k = mapped(call.signal->name);
    if (!k) return std::nullopt;
    return solver::evaluate_figure(call, *capture, *k, std::nullopt);
  };
  for (const FigureOutcome& r : a.evaluation.reports) {
    Row row;
    row.name = r.name;
    row.figure = r.call->text;
    row.call = r.call;
    row.a = r.value;
    if (measured) {
      row.b = on_capture(*r.call);
    } else {
      for (const FigureOutcome& rb : b.evaluation.reports)
        if (rb.name == r.name) row.b = rb.value;
    }
    rows.push_back(std::move(row));
  }
  if (!measured)
    for (const FigureOutcome& rb : b.evaluation.reports) {
      const bool seen = std::any_of(rows.begin(), rows.end(), [&](const Row& x) { return x.name == rb.name; });
      if (seen) continue;
      Row row;
      row.name = rb.name;
      row.figure = rb.call->text;
      row.call = rb.call;
      row.b = rb.value;
      rows.push_back(std::move(row));
    }
  std::vector<Row> expects;
  for (const ExpectOutcome& e : a.evaluation.expects) {
    Row row;
    row.name = e.expect->text;
    row.figure = e.expect->figure.text;
    row.call = &e.expect->figure;
    row.a = e.value;
    row.pass_a = e.pass;
    if (measured) {
      row.b = on_capture(e.expect->figure);
      if (row.b && row.b->ok) row.pass_b = solver::expect_holds(*e.expect, row.b->value);
    } else {
      for (const ExpectOutcome& eb : b.evaluation.expects)
        if (eb.expect->text == e.expect->text) {
          row.b = eb.value;
          row.pass_b = eb.pass;
        }
    }
    expects.push_back(std::move(row));
  }

  // --- Table ------------------------------------------------------------------------------
  if (!o.run.quiet) {
    std::printf("Compare\n  A         %s\n  %-9s %s\n", o.files[0].c_str(), label_b.c_str(),
                measured ? o.measured.c_str() : o.files[1].c_str());
    if (!rows.empty()) {
      std::size_t wn = 4, wa = 1, wb = label_b.size(), wd = label_b.size() + 4;
      for (const Row& r : rows) {
        wn = std::max(wn, r.name.size() + 1 + r.figure.size());
        wa = std::max(wa, value_text(r, r.a).size());
        wb = std::max(wb, value_text(r, r.b).size());
        wd = std::max(wd, difference_text(r).first.size());
      }
      std::printf("\nFigures\n  %-*s  %-*s  %-*s  %-*s  %s\n", static_cast<int>(wn), "", static_cast<int>(wa), "A",
                  static_cast<int>(wb), label_b.c_str(), static_cast<int>(wd), (label_b + " - A").c_str(), "change");
      for (const Row& r : rows) {
        const auto [diff, rel] = difference_text(r);
        std::printf("  %-*s  %-*s  %-*s  %-*s  %s\n", static_cast<int>(wn), (r.name + " " + r.figure).c_str(),
                    static_cast<int>(wa), value_text(r, r.a).c_str(), static_cast<int>(wb), value_text(r, r.b).c_str(),
                    static_cast<int>(wd), diff.c_str(), rel.c_str());
      }
    }
    if (!expects.empty()) {
      std::size_t wn = 6;
      for (const Row& r : expects) wn = std::max(wn, r.name.size());
      std::printf("\nExpects\n  %-*s  %-4s  %s\n", static_cast<int>(wn), "", "A", label_b.c_str());
      auto verdict = [](const std::optional<bool>& p) { return p ? (*p ? "pass" : "FAIL") : "-"; };
      for (const Row& r : expects)
        std::printf("  %-*s  %-4s  %-4s  (%s, %s)\n", static_cast<int>(wn), r.name.c_str(), verdict(r.pass_a),
                    verdict(r.pass_b), value_text(r, r.a).c_str(), value_text(r, r.b).c_str());
    }
    std::fflush(stdout);
  }

  // --- JSON ---------------------------------------------------------------------------------
  if (!o.run.json.empty()) {
    nlohmann::json j;
    j["a"] = o.files[0];
    j["b"] = measured ? o.measured : o.files[1];
    j["measured"] = measured;
    j["figures"] = nlohmann::json::array();
    for (const Row& r : rows) {
      nlohmann::json x{{"name", r.name}, {"figure", r.figure}, {"a", value_json(r.a)}, {"b", value_json(r.b)}};
      if (r.a && r.b && r.a->ok && r.b->ok) x["difference"] = r.b->value - r.a->value;
      j["figures"].push_back(x);
    }
    j["expects"] = nlohmann::json::array();
    for (const Row& r : expects) {
      nlohmann::json x{{"expect", r.name}, {"a", value_json(r.a)}, {"b", value_json(r.b)}};
      if (r.pass_a) x["pass_a"] = *r.pass_a;
      if (r.pass_b) x["pass_b"] = *r.pass_b;
      j["expects"].push_back(x);
    }
    if (!write_json_file(o.run.json, j)) return kExitBadInput;
  }

  // --- Overlay plot ----------------------------------------------------------------------
  if (target) {
    // Signals: each of A's records, with B's (or the capture's) namesake beside it, over the
    // instants of A inside both spans.
    struct Pair {
      std::size_t a;
      std::optional<std::size_t> other;
    };
    std::vector<Pair> pairs;
    std::vector<PlotSignal> signals;
    // Legend tags: "model"/"measured", or the two files' names ("rev A"/"rev B" when the
    // names are the same); never a bare "A", which reads as amperes.
    const auto stem = [](const std::string& path) {
      const std::size_t slash = path.find_last_of('/');
      std::string name = slash == std::string::npos ? path : path.substr(slash + 1);
      const std::size_t dot = name.rfind('.');
      return dot == std::string::npos || dot == 0 ? name : name.substr(0, dot);
    };
    std::string tag_a = measured ? "model" : stem(o.files[0]);
    std::string tag_b = measured ? "measured" : stem(o.files[1]);
    if (tag_a == tag_b) {
      tag_a = "rev A";
      tag_b = "rev B";
    }
    for (std::size_t k = 0; k < ca.records.size(); ++k) {
      Pair p{k, std::nullopt};
      if (measured) {
        p.other = mapped(ca.records[k].name);
      } else {
        const Circuit& cb = *b.loaded->circuit;
        for (std::size_t m = 0; m < cb.records.size(); ++m)
          if (cb.records[m].name == ca.records[k].name) p.other = m;
      }
      signals.push_back({ca.records[k].name + " (" + tag_a + ")", ca.records[k].unit});
      if (p.other) signals.push_back({ca.records[k].name + " (" + tag_b + ")", ca.records[k].unit});
      pairs.push_back(p);
    }
    const solver::Trajectory& other = measured ? static_cast<const solver::Trajectory&>(*capture) : *b.summary.trajectory;
    const double lo = std::max(a.time.front(), other.start()), hi = std::min(a.time.back(), other.end());
    PlotData data(signals, a.time.size());
    std::vector<double> row(signals.size());
    for (std::size_t i = 0; i < a.time.size(); ++i) {
      const double t = a.time[i];
      if (t < lo || t > hi) continue;
      std::size_t c = 0;
      for (const Pair& p : pairs) {
        row[c++] = a.values[p.a][i];
        if (p.other) row[c++] = other.value(*p.other, t);
      }
      data.add(t, row.data(), row.size());
    }
    data.finish();
    PlotRequest request;
    request.target = *target;
    request.title = "compare: " + (ca.title.empty() ? o.files[0] : ca.title) + " vs " +
                    (measured ? o.measured : o.files[1]);
    request.t_end = hi;
    std::string error;
    if (!draw_plot(request, data, error)) {
      print_error(error);
      return kExitBadInput;
    }
  }
  return kExitOk;
}

}  // namespace ringdown::cli
