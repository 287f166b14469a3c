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
#include <chrono>
#include <cerrno>
#include <cmath>
#include <cstring>
#include <tuple>
#include <cstdio>
#include <fstream>
#include <memory>
#include <mutex>
#include <optional>
#include <string>

#include "cli/atomic_file.hpp"
#include "cli/console.hpp"
#include "cli/csv_writer.hpp"
#include "cli/evaluation.hpp"
#include "cli/exit_codes.hpp"
#include "cli/modes.hpp"
#include "cli/plot.hpp"
#include "cli/progress.hpp"
#include "cli/quantity.hpp"
#include "cli/report.hpp"
#include "cli/distribute.hpp"
#include "cli/sweep.hpp"
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
  if (c.frequency) note(c.frequency->where, "the frequency analysis is run by `ringdown freq`, not by run");
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
  if (summary.formula_error > 0)
    std::fprintf(out, "  formula fit  %.2g of the sources' peak (estimated)\n", summary.formula_error);
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

// Flags shared by run, check and compare (CLI.md "Options shared by run, check, compare, freq").
void add_shared_flags(CLI::App* cmd, RunOptions& o) {
  cmd->add_option("--set", o.set, "override a parameter (repeatable)")
      ->type_name("NAME=VALUE")
      ->allow_extra_args(false);
  cmd->add_option("--until", o.until, "end of the transient run, e.g. 2m or 10us")->type_name("T");
  cmd->add_option("--every", o.every, "output step, e.g. 200n")->type_name("H");
  cmd->add_option("--record", o.record, "signals to keep, replacing the file's record list")
      ->type_name("S,S,...")
      ->allow_extra_args(false);
  cmd->add_option("--json", o.json, "write the summary as JSON")->type_name("PATH");
  cmd->add_option("--tol", o.tol, "formula() sources: fit tolerance relative to the source's peak (default 1e-9)")
      ->type_name("TOL");
  cmd->add_option("--elv", o.elv, "the extra-low-voltage band of the safety caution (default 50V,120V)")
      ->type_name("AC_RMS,DC");
  cmd->add_flag("--accept-mains-risk", o.accept_mains_risk,
                "silence the mains caution on the console (still recorded in JSON)");
  cmd->add_flag("--quiet", o.quiet, "print no summary and no progress");
  cmd->add_flag("--no-progress", o.no_progress, "no progress bar");
  cmd->add_flag("--strict", o.strict, "treat warnings as errors (exit 2)");
  cmd->add_option("--jobs", o.jobs, "threads for sweeps and trials (default: every core)")
      ->type_name("N")
      ->check(CLI::PositiveNumber);
}

namespace {

enum class Mode { Run, Check };

// What one file's run leaves for the JSON and JUnit writers.
struct FileOutcome {
  int exit_code = kExitOk;
  int failed_expects = 0;
  nlohmann::json json;
  JUnitSuite junit;
};

std::string position_of(const SourcePosition& w) {
  if (w.line <= 0) return w.file;
  return w.file + ":" + std::to_string(w.line) + ":" + std::to_string(w.column);
}

// --elv AC_RMS,DC
bool parse_elv(const std::string& text, SafetyOptions& safety) {
  const std::vector<std::string> parts = split_signal_list(text);
  if (parts.size() != 2) {
    print_error("--elv takes AC_RMS,DC, got '" + text + "'", "for example --elv 25V,60V");
    return false;
  }
  double* out[] = {&safety.ac_rms, &safety.dc};
  for (int i = 0; i < 2; ++i) {
    const QuantityResult q = parse_quantity(parts[static_cast<std::size_t>(i)], "V");
    if (!q.value) {
      print_error("--elv: " + q.error, q.hint);
      return false;
    }
    if (!(*q.value > 0)) {
      print_error("--elv: the band must be above 0 V, got '" + parts[static_cast<std::size_t>(i)] + "'");
      return false;
    }
    *out[i] = *q.value;
  }
  return true;
}

bool parse_tol(const std::string& text, double& tol) {
  const QuantityResult q = parse_quantity(text, "");
  if (!q.value || !(*q.value > 0) || !(*q.value < 1)) {
    print_error("--tol takes a relative tolerance between 0 and 1, got '" + text + "'",
                "for example --tol 1e-6 or --tol 0.01%");
    return false;
  }
  tol = *q.value;
  return true;
}


// --set and --record into the loader's options; false (printed) on a malformed entry.
bool build_load_options(const RunOptions& options, LoadOptions& load_options) {
  for (const std::string& entry : options.set) {
    const auto eq = entry.find('=');
    if (eq == std::string::npos || trim(entry.substr(0, eq)).empty() ||
        trim(entry.substr(eq + 1)).empty()) {
      print_error("--set takes NAME=VALUE, got '" + entry + "'", "for example --set Rsn=47 or --set Csw=100pF");
      return false;
    }
    load_options.overrides.emplace_back(trim(entry.substr(0, eq)), trim(entry.substr(eq + 1)));
  }
  for (const std::string& list : options.record) {
    for (const std::string& s : split_signal_list(list)) {
      if (s.empty()) {
        print_error("--record: empty signal name in '" + list + "'", "separate names with single commas: --record drain,Lc.i");
        return false;
      }
      load_options.records.push_back(s);
    }
  }
  return true;
}

FileOutcome execute(const RunOptions& options, const Loader& load, Mode mode) {
  FileOutcome out;
  const auto started = std::chrono::steady_clock::now();
  const auto elapsed = [&]() {
    return std::chrono::duration<double>(std::chrono::steady_clock::now() - started).count();
  };
  out.json["file"] = options.file;
  out.junit.name = options.file;
  // A file that cannot be run is one JUnit error case and a JSON error entry.
  const auto refuse = [&](int code, const Diagnostics& diagnostics, const std::string& why) {
    out.exit_code = code;
    out.json["exit_code"] = code;
    out.json["diagnostics"] = diagnostics_json(diagnostics);
    out.junit.cases.push_back(refused_case(options.file, why, diagnostics, elapsed()));
    out.junit.seconds = out.junit.cases.back().seconds;
    return out;
  };
  const bool run_mode = mode == Mode::Run;

  // --- Flags that need no circuit --------------------------------------------
  std::optional<PlotTarget> plot_target;
  if (!options.plot.empty()) {
    std::string error;
    plot_target = parse_plot_target(options.plot, error);
    if (!plot_target) {
      print_error(error);
      return refuse(kExitBadInput, {}, error);
    }
    if (plot_target->kind == PlotTarget::Kind::Terminal && options.csv == "-") {
      print_error("--csv - and --plot term would both write to stdout",
                  "write the CSV to a file, or plot to a .png/.svg/.pdf file");
      return refuse(kExitBadInput, {}, "--csv - and --plot term");
    }
    if (!gnuplot_available()) {
      print_error("--plot needs gnuplot, which is not on PATH", "install the Debian package gnuplot-nox");
      return refuse(kExitBadInput, {}, "gnuplot missing");
    }
  }
  std::optional<PlotTarget> histogram_target;
  if (!options.histogram.empty()) {
    const bool term_clash = !options.plot.empty() && plot_target && plot_target->text();
    histogram_target = plot_target_or_report(options.histogram, options.csv == "-");
    if (!histogram_target) return refuse(kExitBadInput, {}, "bad --histogram");
    if (term_clash && histogram_target->text()) {
      print_error("--plot term and --histogram term would both draw on the terminal", "write one of them to a .png/.svg/.pdf file");
      return refuse(kExitBadInput, {}, "--plot term and --histogram term");
    }
  }
  if (options.digits < 1 || options.digits > kMaxDigits) {
    print_error("--digits takes a whole number from 1 to 17, got " + std::to_string(options.digits));
    return refuse(kExitBadInput, {}, "bad --digits");
  }
  SafetyOptions safety;
  safety.accept_risk = options.accept_mains_risk;
  if (!options.elv.empty() && !parse_elv(options.elv, safety)) return refuse(kExitBadInput, {}, "bad --elv");
  double formula_tolerance = 1e-9;
  if (!options.tol.empty() && !parse_tol(options.tol, formula_tolerance))
    return refuse(kExitBadInput, {}, "bad --tol");
  LoadOptions load_options;
  if (!build_load_options(options, load_options)) return refuse(kExitBadInput, {}, "bad --set or --record");

  // --- Circuit ------------------------------------------------------------------
  LoadResult loaded = load(load_options);
  if (!loaded.ok()) {
    print_diagnostics(loaded.diagnostics, options.strict);
    return refuse(kExitBadInput, loaded.diagnostics, "the file has errors");
  }
  const Circuit& circuit = *loaded.circuit;
  out.json["file"] = circuit.file;
  out.json["title"] = circuit.title;
  out.junit.name = circuit.file;
  Diagnostics warnings;  // printed at the end, after the summary
  for (const Diagnostic& d : loaded.diagnostics)
    if (d.severity != Severity::Error) warnings.push_back(d);
  if (options.strict && !warnings.empty()) {
    print_diagnostics(warnings, true);
    return refuse(kExitBadInput, warnings, "warnings under --strict");
  }
  const std::optional<TransientPlan> plan = plan_transient(options, circuit);
  if (!plan) return refuse(kExitBadInput, {}, "no transient to run");
  for (const Diagnostic& n : not_run_notes(circuit)) warnings.push_back(n);
  const std::size_t rows = expected_rows(plan->until, plan->every);
  if (needs_sweep_runner(circuit, load_options)) {  // sweeps and trials: cli/sweep.hpp
    SweepContext context{&options, &load, load_options, &circuit, plan->until, plan->every,
                         plan->initial_dc, safety, formula_tolerance, plot_target, !run_mode, warnings, histogram_target};
    SweepOutcome swept = run_sweep(context);
    out.exit_code = swept.exit_code;
    out.failed_expects = swept.failed_expects;
    out.json = std::move(swept.json);
    out.junit = std::move(swept.junit);
    return out;
  }
  if (!is_root()) return out;  // a distributed run shares out sweeps only (cli/distribute.hpp)
  if (histogram_target) {
    print_error("--histogram draws the reports over trials, and the file has no trials statement",
                "add e.g. `trials runs=200` and give parts a tol=");
    return refuse(kExitBadInput, {}, "--histogram without trials");
  }

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
        return refuse(kExitBadInput, {}, csv_file->error());
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
  const EvaluationPlan evaluation_plan(circuit, circuit.records, safety);
  solver::TransientOptions engine;
  engine.until = plan->until;
  engine.every = plan->every;
  engine.initial_dc = plan->initial_dc;
  engine.strict = options.strict;
  engine.dense_output = true;
  engine.trajectory_signals = evaluation_plan.extra_signals();
  engine.formula_tolerance = formula_tolerance;
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
    return refuse(code, all, code == kExitNumerical ? "numerical failure" : "bad input");
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

  // --- Figures, verdicts, ratings, safety -----------------------------------------
  Evaluation evaluation;
  if (summary.trajectory) evaluation = evaluation_plan.evaluate(*summary.trajectory, summary.states);
  Diagnostics figure_errors;
  for (const Diagnostic& d : evaluation.diagnostics)
    (d.severity == Severity::Error ? figure_errors : warnings).push_back(d);
  if (summary.formula_error > formula_tolerance)
    warnings.push_back(make_diagnostic(
        Severity::Warning, circuit.transient ? circuit.transient->where : SourcePosition{},
        "the formula() sources are fitted to " + format_si(summary.formula_error, "") +
            " of their peak, not to the tolerance " + format_si(formula_tolerance, ""),
        "a smoother formula, or a looser --tol"));
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
  std::FILE* console = csv_to_stdout ? stderr : stdout;
  if (run_mode && !options.quiet) {
    // With the CSV on stdout the summary moves to stderr, so the CSV stays clean.
    print_summary(console, circuit, *plan, rows, summary, warning_count, options.csv, options);
    print_evaluation(console, evaluation);
    std::fflush(console);
  }
  // A `modes` statement: the natural modes table after the summary
  // (the same table as `ringdown modes`).
  if (run_mode && circuit.modes && !options.quiet) {
    solver::ModesOptions modes_options;
    modes_options.strict = options.strict;
    Diagnostics modes_diagnostics;
    const solver::ModesResult modes = solver::compute_modes(circuit, modes_options, modes_diagnostics);
    if (modes.ok) std::fprintf(console, "\n%s", format_modes(circuit, modes).c_str());
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
  // check is quiet unless something fails; warnings still show (they may be why).
  print_diagnostics(warnings, false);
  print_diagnostics(figure_errors, false);
  if (!figure_errors.empty()) status = kExitBadInput;
  // Failed expects: in check, one error per expect naming the file, the line and the value.
  Diagnostics failed;
  for (const ExpectOutcome& e : evaluation.expects) {
    if (e.pass || !e.value.ok) continue;
    failed.push_back(make_diagnostic(
        Severity::Error, e.expect->where,
        "expect failed: " + e.expect->figure.text + " = " + figure_text(e.expect->figure, e.value) +
            ", the limit is " + limit_text(*e.expect)));
  }
  if (!run_mode) print_diagnostics(failed, false);
  // The mains caution: on the console unless --accept-mains-risk (always in JSON).
  if (evaluation.safety.hazardous && !safety.accept_risk)
    std::fputs(caution_text(evaluation.safety).c_str(), stderr);

  out.failed_expects = evaluation.failed_expects();
  if (mode == Mode::Check && status == kExitOk && out.failed_expects > 0) status = kExitDiffers;
  out.exit_code = status;

  // --- JSON and JUnit -----------------------------------------------------------
  nlohmann::json& j = out.json;
  j["exit_code"] = status;
  j["analyses"]["transient"] = {{"until", plan->until},
                                {"every", plan->every},
                                {"initial", plan->initial_dc ? "dc" : "zero"},
                                {"samples", summary.samples},
                                {"states", summary.states},
                                {"segments", summary.segments},
                                {"switch_events", summary.switch_events}};
  if (summary.formula_error > 0) {
    j["analyses"]["transient"]["formula_error"] = summary.formula_error;
    j["analyses"]["transient"]["formula_tolerance"] = formula_tolerance;
  }
  j["operating_point"] = nlohmann::json::array();
  for (const auto& e : summary.operating_point)
    j["operating_point"].push_back(
        {{"name", e.name}, {"value", e.value}, {"unit", e.unit ? unit_symbol(*e.unit) : ""}});
  j["recorded"] = nlohmann::json::array();
  for (const Signal& s : circuit.records) j["recorded"].push_back(s.name);
  const nlohmann::json ev = evaluation_json(evaluation);
  for (auto it = ev.begin(); it != ev.end(); ++it) j[it.key()] = it.value();
  j["cautions"] = safety_json(evaluation.safety, safety.accept_risk);
  Diagnostics all = warnings;
  all.insert(all.end(), figure_errors.begin(), figure_errors.end());
  j["diagnostics"] = diagnostics_json(all);
  j["run_time"] = {{"engine", summary.seconds}, {"total", elapsed()}};

  for (const ExpectOutcome& e : evaluation.expects) {
    JUnitCase c;
    c.name = "expect " + e.expect->text;
    c.classname = circuit.file;
    if (!e.value.ok) {
      c.error = true;
      c.message = e.value.error;
    } else if (!e.pass) {
      c.failed = true;
      c.message = e.expect->figure.text + " = " + figure_text(e.expect->figure, e.value) +
                  ", the limit is " + limit_text(*e.expect);
      c.detail = position_of(e.expect->where) + ": " + c.message;
    }
    out.junit.cases.push_back(c);
  }
  out.junit.seconds = elapsed();
  return out;
}

}  // namespace

CLI::App* setup_run(CLI::App& app, RunOptions& o) {
  CLI::App* cmd = app.add_subcommand(
      "run", "Run the transient analysis of a circuit file and print the summary");
  cmd->add_option("FILE", o.file, "circuit file (.rlc)")->required();
  add_shared_flags(cmd, o);
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
  cmd->add_option("--csv-signals", o.csv_signals, "sweeps and trials: write the waveforms, a column per point and signal")
      ->type_name("PATH");
  cmd->add_option("--best", o.best, "sweeps: the point that meets every expect with the best report, 'min NAME' or 'max NAME'")
      ->type_name("GOAL");
  cmd->add_option("--histogram", o.histogram, "trials: a histogram of each report, term or PATH.png|.svg|.pdf")
      ->type_name("TARGET");
  return cmd;
}

CLI::App* setup_check(CLI::App& app, CheckOptions& o) {
  CLI::App* cmd = app.add_subcommand(
      "check", "Run circuit files and check their expects: quiet unless something fails, exit 1 if an expect fails");
  cmd->add_option("FILE", o.files, "circuit files (.rlc)")->required();
  add_shared_flags(cmd, o.run);
  cmd->add_option("--junit", o.junit, "write a JUnit XML report, one test case per expect")
      ->type_name("PATH");
  return cmd;
}

bool write_json_file(const std::string& path, const nlohmann::json& j) {
  AtomicFile file(path);
  if (!file.ok()) {
    print_error(file.error());
    return false;
  }
  const std::string text = j.dump(2) + "\n";
  if (std::fwrite(text.data(), 1, text.size(), file.stream()) != text.size()) {
    print_error("cannot write '" + path + "': " + std::strerror(errno));
    return false;
  }
  if (!file.commit()) {
    print_error(file.error());
    return false;
  }
  return true;
}

SimulatedFile simulate_file(const RunOptions& options) {
  SimulatedFile out;
  out.exit_code = kExitBadInput;
  if (!readable_or_report(options.file)) return out;
  SafetyOptions safety;
  safety.accept_risk = options.accept_mains_risk;
  if (!options.elv.empty() && !parse_elv(options.elv, safety)) return out;
  double tol = 1e-9;
  if (!options.tol.empty() && !parse_tol(options.tol, tol)) return out;
  LoadOptions load_options;
  if (!build_load_options(options, load_options)) return out;
  out.loaded = std::make_unique<LoadResult>(load_file(options.file, load_options));
  if (!out.loaded->ok()) {
    print_diagnostics(out.loaded->diagnostics, options.strict);
    return out;
  }
  const Circuit& circuit = *out.loaded->circuit;
  Diagnostics warnings;
  for (const Diagnostic& d : out.loaded->diagnostics)
    if (d.severity != Severity::Error) warnings.push_back(d);
  const std::optional<TransientPlan> plan = plan_transient(options, circuit);
  if (!plan) return out;
  out.until = plan->until;
  out.every = plan->every;
  out.plan = std::make_unique<EvaluationPlan>(circuit, circuit.records, safety);
  solver::TransientOptions engine;
  engine.until = plan->until;
  engine.every = plan->every;
  engine.initial_dc = plan->initial_dc;
  engine.strict = options.strict;
  engine.dense_output = true;
  engine.trajectory_signals = out.plan->extra_signals();
  engine.formula_tolerance = tol;
  out.values.resize(circuit.records.size());
  bool finite = true;
  const solver::SampleSink sink = [&](double t, const double* v, std::size_t n) {
    out.time.push_back(t);
    for (std::size_t i = 0; i < n; ++i) {
      finite = finite && std::isfinite(v[i]);
      out.values[i].push_back(v[i]);
    }
  };
  Diagnostics engine_diagnostics;
  out.summary = solver::run_transient(circuit, circuit.records, engine, sink, engine_diagnostics);
  for (const Diagnostic& d : engine_diagnostics) warnings.push_back(d);
  if (out.summary.status != solver::Status::Ok || !finite || !out.summary.trajectory) {
    print_diagnostics(warnings, options.strict);
    out.exit_code = out.summary.status == solver::Status::BadInput ? kExitBadInput : kExitNumerical;
    return out;
  }
  out.evaluation = out.plan->evaluate(*out.summary.trajectory, out.summary.states);
  for (const Diagnostic& d : out.evaluation.diagnostics) warnings.push_back(d);
  print_diagnostics(warnings, options.strict);
  if (out.evaluation.safety.hazardous && !safety.accept_risk)
    std::fputs(caution_text(out.evaluation.safety).c_str(), stderr);
  out.exit_code = kExitOk;
  for (const Diagnostic& d : warnings)
    if (d.severity == Severity::Error || (options.strict && d.severity == Severity::Warning))
      out.exit_code = kExitBadInput;
  return out;
}

Loader parse_once(std::function<std::shared_ptr<const ParsedSource>()> parse) {
  struct Once {
    std::once_flag flag;
    std::function<std::shared_ptr<const ParsedSource>()> parse;
    std::shared_ptr<const ParsedSource> source;
  };
  auto once = std::make_shared<Once>();
  once->parse = std::move(parse);
  return [once](const LoadOptions& load) {
    std::call_once(once->flag, [&once] { once->source = once->parse(); });
    return elaborate(*once->source, load);
  };
}

int run_run(const RunOptions& options) {
  if (!readable_or_report(options.file)) return kExitBadInput;
  const std::string file = options.file;
  return run_loaded(options, parse_once([file] { return parse_file(file); }));
}

int run_loaded(const RunOptions& options, const Loader& load) {
  const FileOutcome outcome = execute(options, load, Mode::Run);
  if (!options.json.empty() && !write_json_file(options.json, outcome.json)) return kExitBadInput;
  return outcome.exit_code;
}

int run_check(const CheckOptions& options) {
  int worst = kExitOk;
  std::vector<JUnitSuite> suites;
  nlohmann::json files = nlohmann::json::array();
  int failed = 0;
  for (const std::string& file : options.files) {
    RunOptions run = options.run;
    run.file = file;
    run.quiet = true;
    run.csv.clear();
    run.plot.clear();
    FileOutcome outcome;
    if (!readable_or_report(file)) {
      outcome.exit_code = kExitBadInput;
      outcome.json = {{"file", file}, {"exit_code", kExitBadInput}, {"error", "cannot read the file"}};
      outcome.junit.name = file;
      outcome.junit.cases.push_back(refused_case(file, "cannot read the file", {}, 0));
    } else {
      outcome = execute(run, parse_once([&file] { return parse_file(file); }), Mode::Check);
    }
    // The worst outcome wins: a numerical failure (3) over bad input (2) over a failed expect (1).
    worst = std::max(worst, outcome.exit_code);
    failed += outcome.failed_expects;
    files.push_back(outcome.json);
    suites.push_back(std::move(outcome.junit));
  }
  if (!options.run.json.empty()) {
    nlohmann::json j{{"files", files}, {"failed_expects", failed}, {"exit_code", worst}};
    if (!write_json_file(options.run.json, j)) worst = std::max(worst, static_cast<int>(kExitBadInput));
  }
  if (!options.junit.empty()) {
    AtomicFile out(options.junit);
    const std::string xml = junit_xml(suites);
    std::string error;
    if (!out.ok())
      error = out.error();
    else if (std::fwrite(xml.data(), 1, xml.size(), out.stream()) != xml.size())
      error = "cannot write '" + options.junit + "': " + std::strerror(errno);
    else if (!out.commit())
      error = out.error();
    if (!error.empty()) {
      print_error(error);
      worst = std::max(worst, static_cast<int>(kExitBadInput));
    }
  }
  return worst;
}

}  // namespace ringdown::cli
