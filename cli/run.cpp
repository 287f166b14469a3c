// `ringdown run`: see run.hpp. The order of work is chosen so that a failure
// at any point leaves no output file behind and says why:
//   flags -> load (diagnostics) -> transient settings -> open outputs (as
//   temporaries) -> engine, streaming samples to the CSV writer and the plot
//   buffer -> status and warnings (--strict) -> commit files -> summary ->
//   plot -> warnings.
#include "cli/run.hpp"

#include <unistd.h>

#include <CLI/CLI.hpp>
#include <algorithm>
#include <cerrno>
#include <cmath>
#include <cstring>
#include <tuple>
#include <cstdio>
#include <fstream>
#include <memory>
#include <optional>
#include <string>

#include "cli/atomic_file.hpp"
#include "cli/console.hpp"
#include "cli/csv_writer.hpp"
#include "cli/exit_codes.hpp"
#include "cli/modes.hpp"
#include "cli/plot.hpp"
#include "cli/progress.hpp"
#include "cli/quantity.hpp"
#include "parser/units.hpp"
#include "solver/transient.hpp"

namespace ringdown::cli {

namespace {

// %.17g round-trips any double (IEEE 754-2008, section 5.12.2: 17 significant
// digits suffice for binary64), so more digits would only add noise.
constexpr int kMaxDigits = 17;
// NETLIST.md section 7: T/H "within 1e-9 (relative) of a whole number".
constexpr double kWholeStepsTolerance = 1e-9;
// NETLIST.md section 7: every defaults to until / 1000.
constexpr double kDefaultStepsPerRun = 1000;

std::string trim(const std::string& s) {
  const auto first = s.find_first_not_of(" \t");
  if (first == std::string::npos) return {};
  const auto last = s.find_last_not_of(" \t");
  return s.substr(first, last - first + 1);
}

// Output rows for until T and step H: N + 1 with N from NETLIST.md section 7.
std::size_t expected_rows(double until, double every) {
  const double ratio = until / every;
  const double whole = std::round(ratio);
  const double steps =
      std::fabs(ratio - whole) <= kWholeStepsTolerance * std::max(1.0, ratio) ? whole : std::floor(ratio);
  return static_cast<std::size_t>(std::max(0.0, steps)) + 1;
}

std::string si(double value, const Unit& unit) {
  return format_si(value, unit ? unit_symbol(*unit) : std::string());
}

// Transient settings after the command-line overrides.
struct TransientPlan {
  double until = 0;
  double every = 0;
  bool initial_dc = true;
};

// Reads --until/--every and merges them with the file's transient statement.
std::optional<TransientPlan> plan_transient(const RunOptions& options, const Circuit& circuit) {
  std::optional<double> until, every;
  for (auto [flag, text, out] : {std::tuple{"--until", &options.until, &until},
                                 std::tuple{"--every", &options.every, &every}}) {
    if (text->empty()) continue;
    const QuantityResult q = parse_quantity(*text, "s");
    if (!q.value) {
      print_error(std::string(flag) + ": " + q.error, q.hint);
      return std::nullopt;
    }
    if (!(*q.value > 0)) {
      print_error(std::string(flag) + ": the time must be greater than 0, got '" + *text + "'");
      return std::nullopt;
    }
    *out = *q.value;
  }
  TransientPlan plan;
  if (circuit.transient) {
    plan.until = circuit.transient->until;
    plan.every = circuit.transient->every;
    plan.initial_dc = circuit.transient->initial_dc;
    // A file that gave no `every` got until/1000; keep that rule when only
    // --until changes (a file's own `every` is kept as written).
    const bool every_was_default =
        std::fabs(plan.every - plan.until / kDefaultStepsPerRun) <= 1e-12 * plan.every;
    if (until) {
      plan.until = *until;
      if (every_was_default) plan.every = plan.until / kDefaultStepsPerRun;
    }
  } else if (until) {
    plan.until = *until;
    plan.every = plan.until / kDefaultStepsPerRun;
  } else {
    std::string hint = "add a line such as `transient until=1m` or pass --until";
    std::string message = "'" + circuit.file + "' has no transient statement: nothing to run";
    if (circuit.frequency || circuit.modes)
      message += " (frequency and modes analyses are not available in this version)";
    print_error(message, hint);
    return std::nullopt;
  }
  if (every) plan.every = *every;
  if (plan.every > plan.until) {
    print_error("the output step (" + format_si(plan.every, "s") + ") is longer than the run (" +
                    format_si(plan.until, "s") + ")",
                "pick --every at most --until");
    return std::nullopt;
  }
  return plan;
}

// Notes for statements this version reads but does not execute yet.
Diagnostics not_run_notes(const Circuit& c) {
  Diagnostics notes;
  auto note = [&](const SourcePosition& where, const std::string& message) {
    Diagnostic d;
    d.severity = Severity::Note;
    d.where = where;
    d.message = message;
    notes.push_back(d);
  };
  if (c.frequency) note(c.frequency->where, "the frequency analysis is not run by this version");
  if (!c.sweeps.empty())
    note(c.sweeps.front().where, "sweeps are not run by this version; the file's values are used");
  if (c.trials) note(c.trials->where, "trials are not run by this version");
  return notes;
}

struct NonFinite {
  bool seen = false;
  double t = 0;
  std::size_t signal = 0;
};

void print_summary(std::FILE* out, const Circuit& circuit, const TransientPlan& plan,
                   std::size_t rows, const solver::TransientSummary& summary, int warnings,
                   const std::string& csv, const RunOptions& options) {
  const std::string title = circuit.title.empty() ? circuit.file : circuit.title;
  std::fprintf(out, "%s\n", title.c_str());
  if (!circuit.title.empty()) std::fprintf(out, "  file         %s\n", circuit.file.c_str());
  std::fprintf(out, "  transient    until=%s every=%s initial=%s (%zu samples)\n",
               format_si(plan.until, "s").c_str(), format_si(plan.every, "s").c_str(),
               plan.initial_dc ? "dc" : "zero", rows);

  if (!summary.operating_point.empty()) {
    std::fprintf(out, "\n%s\n", plan.initial_dc ? "DC operating point (t = 0)"
                                                : "Initial state (t = 0, initial=zero)");
    std::size_t width = 0;
    for (const auto& e : summary.operating_point) width = std::max(width, e.name.size());
    for (const auto& e : summary.operating_point)
      std::fprintf(out, "  %-*s  %s\n", static_cast<int>(width), e.name.c_str(),
                   si(e.value, e.unit).c_str());
  }

  std::fprintf(out, "\nRun\n");
  std::fprintf(out, "  samples      %zu\n", summary.samples);
  std::fprintf(out, "  states       %zu\n", summary.states);
  std::fprintf(out, "  segments     %zu (%zu switch event%s)\n", summary.segments,
               summary.switch_events, summary.switch_events == 1 ? "" : "s");
  std::fprintf(out, "  propagators  %zu\n", summary.propagators_built);
  std::fprintf(out, "  time         %s\n", format_si(summary.seconds, "s", 3).c_str());
  if (!circuit.records.empty()) {
    std::string names;
    for (const Signal& s : circuit.records) names += (names.empty() ? "" : ", ") + s.name;
    std::fprintf(out, "  recorded     %s\n", names.c_str());
  }
  if (!csv.empty()) std::fprintf(out, "  csv          %s\n", csv == "-" ? "stdout" : csv.c_str());
  if (!options.plot.empty()) std::fprintf(out, "  plot         %s\n", options.plot.c_str());
  if (!circuit.reports.empty() || !circuit.expects.empty())
    std::fprintf(out, "  figures      %zu report(s), %zu expect(s): not evaluated by this version\n",
                 circuit.reports.size(), circuit.expects.size());
  std::fprintf(out, "  warnings     %d%s\n", warnings, warnings ? " (on stderr)" : "");
  std::fflush(out);
}

}  // namespace

std::vector<std::string> split_signal_list(const std::string& text) {
  std::vector<std::string> out;
  std::string current;
  int depth = 0;
  for (char c : text) {
    if (c == '(') ++depth;
    if (c == ')') --depth;
    if (c == ',' && depth <= 0) {
      out.push_back(trim(current));
      current.clear();
      continue;
    }
    current += c;
  }
  out.push_back(trim(current));
  return out;
}

CLI::App* setup_run(CLI::App& app, RunOptions& o) {
  CLI::App* cmd = app.add_subcommand(
      "run", "Run the transient analysis of a circuit file and print the summary");
  cmd->add_option("FILE", o.file, "circuit file (.rlc)")->required();
  cmd->add_option("--set", o.set, "override a parameter (repeatable)")
      ->type_name("NAME=VALUE")
      ->allow_extra_args(false);
  cmd->add_option("--until", o.until, "end of the transient run, e.g. 2m or 10us")->type_name("T");
  cmd->add_option("--every", o.every, "output step, e.g. 200n")->type_name("H");
  cmd->add_option("--record", o.record, "signals to keep, replacing the file's record list")
      ->type_name("S,S,...")
      ->allow_extra_args(false);
  cmd->add_option("--csv", o.csv, "write the recorded signals as CSV ('-': stdout)")
      ->type_name("PATH");
  cmd->add_option("--digits", o.digits, "significant digits in the CSV (default 12)")
      ->type_name("N")
      ->check([](const std::string& text) -> std::string {
        try {
          const int n = std::stoi(text);
          if (n >= 1 && n <= kMaxDigits) return {};
        } catch (const std::exception&) {
        }
        return "takes a whole number from 1 to 17, got '" + text + "'";
      });
  cmd->add_option("--plot", o.plot, "plot the recorded signals: term, or PATH.png|.svg|.pdf")
      ->type_name("TARGET");
  cmd->add_flag("--quiet", o.quiet, "print no summary and no progress");
  cmd->add_flag("--no-progress", o.no_progress, "no progress bar");
  cmd->add_flag("--strict", o.strict, "treat warnings as errors (exit 2)");
  return cmd;
}

int run_run(const RunOptions& options) {
  if (!readable_or_report(options.file)) return kExitBadInput;
  const std::string file = options.file;
  return run_loaded(options, [file](const LoadOptions& load) { return load_file(file, load); });
}

int run_loaded(const RunOptions& options, const Loader& load) {
  // --- Flags that need no circuit --------------------------------------------
  std::optional<PlotTarget> plot_target;
  if (!options.plot.empty()) {
    std::string error;
    plot_target = parse_plot_target(options.plot, error);
    if (!plot_target) {
      print_error(error);
      return kExitBadInput;
    }
    if (plot_target->kind == PlotTarget::Kind::Terminal && options.csv == "-") {
      print_error("--csv - and --plot term would both write to stdout",
                  "write the CSV to a file, or plot to a .png/.svg/.pdf file");
      return kExitBadInput;
    }
    if (!gnuplot_available()) {
      print_error("--plot needs gnuplot, which is not on PATH", "install the Debian package gnuplot-nox");
      return kExitBadInput;
    }
  }
  if (options.digits < 1 || options.digits > kMaxDigits) {
    print_error("--digits takes a whole number from 1 to 17, got " + std::to_string(options.digits));
    return kExitBadInput;
  }
  LoadOptions load_options;
  for (const std::string& entry : options.set) {
    const auto eq = entry.find('=');
    if (eq == std::string::npos || trim(entry.substr(0, eq)).empty() ||
        trim(entry.substr(eq + 1)).empty()) {
      print_error("--set takes NAME=VALUE, got '" + entry + "'", "for example --set Rsn=47 or --set Csw=100pF");
      return kExitBadInput;
    }
    load_options.overrides.emplace_back(trim(entry.substr(0, eq)), trim(entry.substr(eq + 1)));
  }
  for (const std::string& list : options.record) {
    for (const std::string& s : split_signal_list(list)) {
      if (s.empty()) {
        print_error("--record: empty signal name in '" + list + "'", "separate names with single commas: --record drain,Lc.i");
        return kExitBadInput;
      }
      load_options.records.push_back(s);
    }
  }

  // --- Circuit ------------------------------------------------------------------
  LoadResult loaded = load(load_options);
  if (!loaded.ok()) {
    print_diagnostics(loaded.diagnostics, options.strict);
    return kExitBadInput;
  }
  const Circuit& circuit = *loaded.circuit;
  Diagnostics warnings;  // printed at the end, after the summary
  for (const Diagnostic& d : loaded.diagnostics)
    if (d.severity != Severity::Error) warnings.push_back(d);
  if (options.strict && !warnings.empty()) {
    print_diagnostics(warnings, true);
    return kExitBadInput;
  }
  const std::optional<TransientPlan> plan = plan_transient(options, circuit);
  if (!plan) return kExitBadInput;
  for (const Diagnostic& n : not_run_notes(circuit)) warnings.push_back(n);
  const std::size_t rows = expected_rows(plan->until, plan->every);

  // --- Outputs (temporaries until the run succeeds) ---------------------------
  const bool csv_to_stdout = options.csv == "-";
  std::unique_ptr<AtomicFile> csv_file;
  std::unique_ptr<CsvWriter> csv;
  if (!options.csv.empty()) {
    std::FILE* stream = stdout;
    if (!csv_to_stdout) {
      csv_file = std::make_unique<AtomicFile>(options.csv);
      if (!csv_file->ok()) {
        print_error(csv_file->error());
        return kExitBadInput;
      }
      stream = csv_file->stream();
    }
    csv = std::make_unique<CsvWriter>(stream, options.digits);
    std::vector<std::string> names;
    for (const Signal& s : circuit.records) names.push_back(s.name);
    csv->header(names);
  }
  std::unique_ptr<PlotData> plot_data;
  if (plot_target) {
    std::vector<PlotSignal> signals;
    for (const Signal& s : circuit.records) signals.push_back({s.name, s.unit});
    plot_data = std::make_unique<PlotData>(std::move(signals), rows);
  }

  // --- Engine -------------------------------------------------------------------
  const bool show_progress = !options.quiet && !options.no_progress && ProgressBar::stderr_is_terminal();
  ProgressBar progress(show_progress, rows);
  solver::TransientOptions engine;
  engine.until = plan->until;
  engine.every = plan->every;
  engine.initial_dc = plan->initial_dc;
  engine.strict = options.strict;
  if (show_progress) engine.progress = [&progress](double fraction) { progress.update(fraction); };

  NonFinite non_finite;
  const solver::SampleSink sink = [&](double t, const double* values, std::size_t count) {
    if (non_finite.seen) return;
    bool finite = std::isfinite(t);
    for (std::size_t i = 0; i < count && finite; ++i) {
      if (!std::isfinite(values[i])) {
        finite = false;
        non_finite.signal = i;
      }
    }
    if (!finite) {
      non_finite = {true, t, non_finite.signal};
      return;
    }
    if (csv) csv->row(t, values, count);
    if (plot_data) plot_data->add(t, values, count);
  };
  Diagnostics engine_diagnostics;
  const solver::TransientSummary summary =
      solver::run_transient(circuit, circuit.records, engine, sink, engine_diagnostics);
  progress.finish();

  // --- Verdict ------------------------------------------------------------------
  const auto fail = [&](int code) {
    if (csv) csv->abandon();
    if (csv_file) csv_file->discard();
    Diagnostics all = warnings;
    all.insert(all.end(), engine_diagnostics.begin(), engine_diagnostics.end());
    print_diagnostics(all, options.strict);
    return code;
  };
  if (summary.status == solver::Status::BadInput) return fail(kExitBadInput);
  if (summary.status == solver::Status::Numerical) return fail(kExitNumerical);
  if (non_finite.seen) {
    const std::string name = non_finite.signal < circuit.records.size()
                                 ? circuit.records[non_finite.signal].name
                                 : std::to_string(non_finite.signal + 1);
    engine_diagnostics.push_back(command_line_diagnostic(
        Severity::Error,
        "the engine produced a value that is not a finite number (NaN or infinity) for '" + name +
            "' at t = " + format_si(non_finite.t, "s") + "; nothing was written",
        "the network may be singular or unstable: check for floating parts or negative resistances"));
    return fail(kExitNumerical);
  }
  for (const Diagnostic& d : engine_diagnostics) {
    if (d.severity == Severity::Error) return fail(kExitNumerical);
  }
  for (const Diagnostic& d : engine_diagnostics) warnings.push_back(d);
  if (options.strict) {
    for (const Diagnostic& d : warnings)
      if (d.severity == Severity::Warning) return fail(kExitBadInput);
  }
  if (csv && !csv->flush()) {
    print_error("cannot write the CSV " + (csv_to_stdout ? std::string("to stdout") : "'" + options.csv + "'") +
                ": " + std::strerror(errno));
    return fail(kExitBadInput);
  }
  csv.reset();
  if (csv_file && !csv_file->commit()) {
    print_error(csv_file->error());
    return fail(kExitBadInput);
  }

  // --- Summary, plot, warnings ---------------------------------------------------
  int warning_count = 0;
  for (const Diagnostic& d : warnings) warning_count += d.severity == Severity::Warning;
  if (!options.quiet) {
    // With the CSV on stdout the summary moves to stderr, so the CSV stays clean.
    print_summary(csv_to_stdout ? stderr : stdout, circuit, *plan, rows, summary, warning_count,
                  options.csv, options);
  }
  // A `modes` statement: the natural modes table after the summary
  // (the same table as `ringdown modes`).
  if (circuit.modes && !options.quiet) {
    solver::ModesOptions modes_options;
    modes_options.strict = options.strict;
    Diagnostics modes_diagnostics;
    const solver::ModesResult modes = solver::compute_modes(circuit, modes_options, modes_diagnostics);
    std::FILE* out = csv_to_stdout ? stderr : stdout;
    if (modes.ok) std::fprintf(out, "\n%s", format_modes(circuit, modes).c_str());
    for (const Diagnostic& d : modes_diagnostics) warnings.push_back(d);
  }
  int status = kExitOk;
  if (plot_data) {
    plot_data->finish();
    if (!options.quiet && plot_target->kind == PlotTarget::Kind::Terminal) std::fputc('\n', stdout);
    PlotRequest request;
    request.target = *plot_target;
    request.title = circuit.title.empty() ? circuit.file : circuit.title;
    request.t_end = plan->until;
    std::string error;
    if (!draw_plot(request, *plot_data, error)) {
      print_error(error);
      status = kExitBadInput;
    }
  }
  print_diagnostics(warnings, false);
  return status;
}

}  // namespace ringdown::cli
