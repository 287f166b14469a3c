// The sweep and trials runner: see sweep.hpp. The order of work:
//   grid (sweeps minus parameters fixed by a scalar --set) -> load every point (parallel)
//   -> every (point, trial) job (parallel, results by index) -> failures? stop, write nothing
//   -> --csv table, --csv-signals (temporaries, committed together) -> summary, --best,
//   plot -> verdicts (check) -> JSON and JUnit.
// Deliberately not here: any state shared between jobs (each job owns its circuit copy, its
// evaluation plan and its engine run; the solver keeps no statics).
#include "cli/sweep.hpp"

#include <algorithm>
#include <atomic>
#include <chrono>
#include <cerrno>
#include <cmath>
#include <cstdio>
#include <cstring>
#include <exception>
#include <map>
#include <optional>
#include <memory>
#include <set>
#include <string>
#include <thread>
#include <utility>

#if defined(__GLIBC__)
#include <malloc.h>
#endif

#include "cli/atomic_file.hpp"
#include "cli/console.hpp"
#include "cli/csv_writer.hpp"
#include "cli/distribute.hpp"
#include "cli/exit_codes.hpp"
#include "cli/histogram_plot.hpp"
#include "cli/progress.hpp"
#include "cli/sweep_job.hpp"
#include "mna/descriptor.hpp"
#include "parser/units.hpp"
#include "solver/draws.hpp"
#include "solver/transient.hpp"

namespace ringdown::cli {

namespace {

// %.17g round-trips a double (IEEE 754-2008 section 5.12.2), so a point's value reaches
// the loader exactly.
constexpr int kExactDigits = 17;
// 95 % two-sided normal quantile (normal table; from memory).
constexpr double kZ95 = 1.959963984540054;
// Bins of the text histogram of a trials summary (common practice, no source).
constexpr int kHistogramBins = 10;
constexpr int kHistogramWidth = 40;

std::string trim(const std::string& s) {
  const auto first = s.find_first_not_of(" \t");
  if (first == std::string::npos) return {};
  const auto last = s.find_last_not_of(" \t");
  return s.substr(first, last - first + 1);
}

std::string number(double v, int digits) {
  char buffer[64];
  std::snprintf(buffer, sizeof buffer, "%.*g", digits, v);
  return buffer;
}

// A --set value written as a sweep list: `(a, b, ...)` with a comma outside inner
// parentheses, or linear/geometric/eNN(...). The parser makes the same decision on the
// parsed tree (parser/load.cpp, is_sweep_list); this textual test only decides whether a
// --set fixes a swept parameter.
bool looks_like_list(const std::string& value) {
  const std::string v = trim(value);
  for (const char* f : {"linear", "geometric", "e6", "e12", "e24", "e96"}) {
    const std::string name = f;
    if (v.rfind(name, 0) == 0 && trim(v.substr(name.size())).rfind('(', 0) == 0) return true;
  }
  if (v.empty() || v.front() != '(') return false;
  int depth = 0;
  for (char c : v) {
    if (c == '(') ++depth;
    if (c == ')') --depth;
    if (c == ',' && depth == 1) return true;
  }
  return false;
}

// The value of a point as override text: the number in SI with the parameter's unit, so
// the loader checks and propagates the unit exactly as for `--set NAME=VALUE`.
std::string override_text(double value, const Unit& unit) {
  const std::string v = number(value, kExactDigits);
  if (!unit || unit->dimensionless()) return v;
  const std::string symbol = unit_symbol(*unit);
  if (symbol.find_first_of("*/^()") == std::string::npos) return v + symbol;
  // A compound unit: the number times unit powers of V, A and s.
  std::string text = "(" + v;
  const std::pair<const char*, int> parts[] = {{"1V", unit->volt2}, {"1A", unit->ampere2}, {"1s", unit->second2}};
  for (const auto& [base, doubled] : parts)
    if (doubled != 0) text += std::string(" * ") + base + "^(" + number(doubled / 2.0, 3) + ")";
  return text + ")";
}

// Hundreds to thousands of runs in a row each allocate and free the same few large buffers
// (a trajectory's checkpoints, the sampled signals: a few hundred KiB). glibc's defaults give
// such blocks back to the kernel on free (mmap, or trimming the heap top) and every run
// then faults them in again, page by page: on a 2,000-sample ladder trial that was about a
// quarter of the run's time. Keep them in the process instead: blocks up to 16 MiB come from
// the heap, and up to 128 MiB of free heap stays mapped (glibc mallopt(3); values common
// practice, no source). Process-wide, set once when the sweep runner starts.
void keep_freed_memory() {
#if defined(__GLIBC__)
  static const bool once = [] {
    mallopt(M_MMAP_THRESHOLD, 16 * 1024 * 1024);
    mallopt(M_TRIM_THRESHOLD, 128 * 1024 * 1024);
    return true;
  }();
  (void)once;
#endif
}

struct ActiveSweep {
  const SweepRequest* request = nullptr;
};

struct Point {
  std::vector<double> values;  // one per active sweep
  std::string label;           // "Rsn=47 Csn=1e-09"
  std::optional<Circuit> circuit;
  Diagnostics diagnostics;
  // With trials: the point's MNA structure, analysed once for all its trials (they scale
  // values only), and the diagnostics of that analysis, which each trial reports as its
  // own engine run would have. Empty when the analysis failed: each trial then analyses
  // (and fails) itself.
  std::shared_ptr<const mna::Network> structure;
  Diagnostics structure_diagnostics;
};

struct TrialsPlan {
  bool active = false;
  long count = 0;               // trials per point
  bool enumerate = false;       // corners: every combination
  solver::DrawSpread spread = solver::DrawSpread::Uniform;
  std::vector<int> parts;       // toleranced parts, in file order (the element index e)
};

struct Stats {
  long n = 0;
  double min = 0, mean = 0, max = 0, sigma = 0;
};

Stats stats_of(const std::vector<double>& v) {
  Stats s;
  s.n = static_cast<long>(v.size());
  if (v.empty()) return s;
  s.min = *std::min_element(v.begin(), v.end());
  s.max = *std::max_element(v.begin(), v.end());
  double sum = 0;
  for (double x : v) sum += x;
  s.mean = sum / static_cast<double>(v.size());
  double ss = 0;
  for (double x : v) ss += (x - s.mean) * (x - s.mean);
  // Sample standard deviation (n - 1; common practice, no source).
  s.sigma = v.size() > 1 ? std::sqrt(ss / static_cast<double>(v.size() - 1)) : 0.0;
  return s;
}

solver::DrawSpread draw_spread(Spread s) {
  switch (s) {
    case Spread::Normal: return solver::DrawSpread::Normal;
    case Spread::Corners: return solver::DrawSpread::Corners;
    default: return solver::DrawSpread::Uniform;
  }
}

// Runs `count` jobs on `threads` workers; `work(i)` must only touch job i's slot. The
// calling thread draws the progress bar while it waits.
template <typename Work>
void parallel_for(std::size_t count, unsigned threads, ProgressBar& progress, double done_before,
                  double share, Work work) {
  std::atomic<std::size_t> next{0}, done{0};
  auto worker = [&]() {
    for (std::size_t i; (i = next.fetch_add(1)) < count;) {
      work(i);
      done.fetch_add(1);
    }
  };
  const unsigned n = static_cast<unsigned>(std::min<std::size_t>(std::max(1U, threads), std::max<std::size_t>(count, 1)));
  std::vector<std::thread> pool;
  for (unsigned k = 0; k < n; ++k) pool.emplace_back(worker);
  while (done.load() < count) {
    progress.update(done_before + share * static_cast<double>(done.load()) / static_cast<double>(count));
    std::this_thread::sleep_for(std::chrono::milliseconds(50));
  }
  for (std::thread& t : pool) t.join();
}

Diagnostic with_context(Diagnostic d, const std::string& context) {
  if (!context.empty()) d.message += " (" + context + ")";
  return d;
}

bool write_text(AtomicFile& file, const std::string& text, std::string& error) {
  if (std::fwrite(text.data(), 1, text.size(), file.stream()) != text.size()) {
    error = "cannot write '" + file.path() + "': " + std::strerror(errno);
    return false;
  }
  return true;
}

}  // namespace

unsigned resolve_jobs(int requested) {
  if (requested > 0) return static_cast<unsigned>(requested);
  const unsigned cores = std::thread::hardware_concurrency();
  return cores == 0 ? 1U : cores;
}

namespace {

std::vector<const SweepRequest*> active_sweeps(const Circuit& circuit, const LoadOptions& load_options) {
  // The last --set of a name decides: a scalar value fixes the parameter (no sweep).
  std::map<std::string, bool> last_is_list;
  for (const auto& [name, value] : load_options.overrides) last_is_list[name] = looks_like_list(value);
  std::vector<const SweepRequest*> out;
  for (const SweepRequest& s : circuit.sweeps) {
    auto it = last_is_list.find(s.parameter);
    if (it != last_is_list.end() && !it->second) continue;
    out.push_back(&s);
  }
  return out;
}

}  // namespace

bool needs_sweep_runner(const Circuit& circuit, const LoadOptions& load_options) {
  return circuit.trials.has_value() || !active_sweeps(circuit, load_options).empty();
}

SweepOutcome run_sweep(const SweepContext& ctx) {
  const RunOptions& options = *ctx.options;
  const Circuit& base = *ctx.base;
  SweepOutcome out;
  const auto started = std::chrono::steady_clock::now();
  const auto elapsed = [&]() {
    return std::chrono::duration<double>(std::chrono::steady_clock::now() - started).count();
  };
  out.json["file"] = base.file;
  out.json["title"] = base.title;
  out.junit.name = base.file;
  const auto refuse = [&](int code, const Diagnostics& diagnostics, const std::string& why) {
    out.exit_code = code;
    out.json["exit_code"] = code;
    out.json["diagnostics"] = diagnostics_json(diagnostics);
    out.junit.cases.push_back(refused_case(base.file, why, diagnostics, elapsed()));
    out.junit.seconds = out.junit.cases.back().seconds;
    return out;
  };
  Diagnostics warnings = ctx.warnings;

  // --- --best -----------------------------------------------------------------------------
  std::optional<std::pair<bool, std::size_t>> best;  // (maximise, report index)
  if (!options.best.empty()) {
    const std::string b = trim(options.best);
    const auto space = b.find_first_of(" \t");
    const std::string how = space == std::string::npos ? b : b.substr(0, space);
    const std::string name = space == std::string::npos ? "" : trim(b.substr(space));
    std::size_t index = base.reports.size();
    for (std::size_t i = 0; i < base.reports.size(); ++i)
      if (base.reports[i].name == name) index = i;
    if ((how != "min" && how != "max") || index == base.reports.size()) {
      std::string names;
      for (const Report& r : base.reports) names += (names.empty() ? "" : ", ") + r.name;
      const std::string message = "--best takes 'min NAME' or 'max NAME' with NAME a report of the file, got '" + options.best + "'";
      print_error(message, names.empty() ? "the file has no report lines" : "reports: " + names);
      return refuse(kExitBadInput, {}, message);
    }
    best = std::pair{how == "max", index};
  }

  // --- Grid ---------------------------------------------------------------------------------
  const std::vector<const SweepRequest*> sweeps = active_sweeps(base, ctx.load_options);
  std::vector<Point> points(1);
  for (const SweepRequest* s : sweeps) {
    std::vector<Point> grown;
    for (const Point& p : points)
      for (double v : s->values) {
        Point q;
        q.values = p.values;
        q.values.push_back(v);
        q.label = p.label + (p.label.empty() ? "" : " ") + s->parameter + "=" + number(v, 6);
        grown.push_back(std::move(q));
      }
    points = std::move(grown);
  }

  TrialsPlan trials;
  if (base.trials) {
    for (std::size_t i = 0; i < base.parts.size(); ++i)
      if (base.parts[i].tol) trials.parts.push_back(static_cast<int>(i));
    if (trials.parts.empty()) {
      warnings.push_back(make_diagnostic(Severity::Warning, base.trials->where,
                                         "trials: no part has tol=, so every trial would be the nominal circuit; the trials are not run",
                                         "give parts a tolerance, e.g. `resistor R1 a b 1k tol=1%`"));
    } else {
      trials.active = true;
      trials.spread = draw_spread(base.trials->spread);
      trials.count = base.trials->runs;
      const std::size_t m = trials.parts.size();
      if (base.trials->spread == Spread::Corners && m < 63 &&
          (1LL << m) <= static_cast<long long>(base.trials->runs)) {
        trials.enumerate = true;
        trials.count = 1L << m;
      }
    }
  }
  const std::size_t per_point = trials.active ? static_cast<std::size_t>(trials.count) : 1;
  const std::size_t job_count = points.size() * per_point;
  const bool keep_signals = !options.csv_signals.empty() || ctx.plot.has_value();
  const unsigned threads = resolve_jobs(options.jobs);
  keep_freed_memory();

  const bool show_progress = !options.quiet && !options.no_progress && ProgressBar::stderr_is_terminal();
  ProgressBar progress(show_progress, job_count);

  // --- Load every point --------------------------------------------------------------------
  const double load_share = sweeps.empty() ? 0.0 : 0.1;
  if (sweeps.empty()) {
    points[0].circuit = base;
  } else {
    parallel_for(points.size(), threads, progress, 0.0, load_share, [&](std::size_t i) {
      Point& p = points[i];
      LoadOptions lo = ctx.load_options;
      for (std::size_t k = 0; k < sweeps.size(); ++k)
        lo.overrides.emplace_back(sweeps[k]->parameter, override_text(p.values[k], sweeps[k]->unit));
      LoadResult r = (*ctx.load)(lo);
      p.diagnostics = std::move(r.diagnostics);
      p.circuit = std::move(r.circuit);
    });
  }
  for (const Point& p : points) {
    if (p.circuit) continue;
    Diagnostics errors;
    for (const Diagnostic& d : p.diagnostics)
      if (d.severity == Severity::Error) errors.push_back(with_context(d, "sweep point " + p.label));
    print_diagnostics(errors, options.strict);
    return refuse(kExitBadInput, errors, "sweep point " + p.label + " has errors");
  }

  if (trials.active)
    for (Point& p : points) {
      std::optional<mna::Network> net = mna::Network::analyse(*p.circuit, options.strict, p.structure_diagnostics);
      if (net) p.structure = std::make_shared<const mna::Network>(std::move(*net));
      else p.structure_diagnostics.clear();
    }

  // --- Every (point, trial) ------------------------------------------------------------------
  std::vector<JobResult> results(job_count);
  const std::size_t record_count = base.records.size();
  // Over the ranks of a distributed run (cli/distribute.hpp); one rank: every job here.
  const auto run_jobs = [&](const std::vector<std::size_t>& jobs) {
    parallel_for(jobs.size(), threads, progress, load_share, 1.0 - load_share, [&](std::size_t k) {
      const std::size_t job = jobs[k];
      JobResult& r = results[job];
      const Point& point = points[job / per_point];
      const std::size_t trial = job % per_point;
      try {
        std::optional<Circuit> copy;
        const Circuit* c = &*point.circuit;
        if (trials.active) {
          copy = *point.circuit;
          for (std::size_t e = 0; e < trials.parts.size(); ++e) {
            const Part& part = copy->parts[static_cast<std::size_t>(trials.parts[e])];
            const double factor = solver::draw_factor(trials.spread, *part.tol, base.trials->seed, trial, e, trials.enumerate);
            Element& el = copy->elements[static_cast<std::size_t>(part.main)];
            if (!(factor > 0)) {
              r.exit_code = kExitBadInput;
              r.diagnostics.push_back(make_diagnostic(
                  Severity::Error, part.where,
                  part.name + ": the normal draw of trial " + std::to_string(trial) + " changes its sign (factor " +
                      number(factor, 4) + ")",
                  "a tolerance above about 35 % with spread=normal can reach zero; use spread=uniform"));
              return;
            }
            el.value *= factor;
            r.drawn.push_back(el.value);
          }
          c = &*copy;
        }
        EvaluationScope scope;
        scope.energy_balance = false;
        scope.exact_safety = false;
        const EvaluationPlan plan(*c, c->records, ctx.safety, scope);
        solver::TransientOptions engine;
        engine.until = ctx.until;
        engine.every = ctx.every;
        engine.initial_dc = ctx.initial_dc;
        engine.strict = options.strict;
        engine.dense_output = true;
        engine.trajectory_signals = plan.extra_signals();
        engine.formula_tolerance = ctx.formula_tolerance;
        if (trials.active && point.structure) {
          engine.structure = point.structure;
          r.diagnostics = point.structure_diagnostics;
        }
        if (keep_signals) r.samples.resize(record_count);
        bool finite = true;
        const solver::SampleSink sink = [&](double t, const double* values, std::size_t count) {
          for (std::size_t i = 0; i < count; ++i) finite = finite && std::isfinite(values[i]);
          if (!keep_signals) return;
          r.times.push_back(t);
          for (std::size_t i = 0; i < count && i < record_count; ++i) r.samples[i].push_back(values[i]);
        };
        Diagnostics engine_diagnostics;
        const solver::TransientSummary summary = solver::run_transient(*c, c->records, engine, sink, engine_diagnostics);
        for (Diagnostic& d : engine_diagnostics) r.diagnostics.push_back(std::move(d));
        if (summary.status == solver::Status::BadInput) r.exit_code = kExitBadInput;
        else if (summary.status == solver::Status::Numerical || !finite) r.exit_code = kExitNumerical;
        // An error without a status (none expected) still fails the run; a bad-input run
        // keeps exit 2, as a single run does (CLI.md).
        for (const Diagnostic& d : r.diagnostics)
          if (d.severity == Severity::Error && r.exit_code == kExitOk) r.exit_code = kExitNumerical;
        if (!finite)
          r.diagnostics.push_back(command_line_diagnostic(
              Severity::Error, "the engine produced a value that is not a finite number (NaN or infinity)",
              "the network may be singular or unstable: check for floating parts or negative resistances"));
        if (r.exit_code != kExitOk || !summary.trajectory) return;
        const Evaluation ev = plan.evaluate(*summary.trajectory, summary.states, scope);
        if (ev.safety.hazardous) r.hazard = ev.safety;
        for (const FigureOutcome& f : ev.reports) r.reports.push_back(f.value);
        for (const ExpectOutcome& e : ev.expects) {
          r.expect_values.push_back(e.value);
          r.expect_pass.push_back(e.pass);
          r.pass = r.pass && e.pass;
        }
        for (const Diagnostic& d : ev.diagnostics)
          if (d.severity != Severity::Error) r.diagnostics.push_back(d);  // figure errors: value.ok = false
      } catch (const std::exception& e) {
        r.exit_code = kExitNumerical;
        r.diagnostics.push_back(command_line_diagnostic(Severity::Error, std::string("the run failed: ") + e.what()));
      }
    });
  };
  const bool gathered = run_distributed(results, run_jobs);
  progress.finish();
  if (!gathered) return out;  // a rank other than 0: its share went to rank 0

  const auto job_label = [&](std::size_t job) {
    std::string label = points[job / per_point].label;
    if (trials.active) label += (label.empty() ? "" : " ") + std::string("trial=") + std::to_string(job % per_point);
    return label;
  };

  // Warnings: each kind once (points repeat the same load and engine warnings, trials with
  // other numbers in them): the key is the position and the message with its numbers blanked,
  // and a warning that recurs says in how many runs.
  const auto shape_of = [](const Diagnostic& d) {
    std::string key = d.where.file + ":" + std::to_string(d.where.line) + ":" + std::to_string(d.where.column) + ":";
    bool in_number = false;
    for (char ch : d.message) {
      const bool digit = (ch >= '0' && ch <= '9') || (in_number && (ch == '.' || ch == 'e' || ch == '-' || ch == '+'));
      if (digit && !in_number) key += '#';
      in_number = digit;
      if (!digit) key += ch;
    }
    return key;
  };
  std::map<std::string, std::pair<std::size_t, long>> seen;  // shape -> (index in warnings, runs)
  for (std::size_t k = 0; k < warnings.size(); ++k) seen[shape_of(warnings[k])] = {k, 0};
  const auto add_warning = [&](const Diagnostic& d, const std::string& context) {
    if (d.severity == Severity::Error) return;
    const auto [it, fresh] = seen.try_emplace(shape_of(d), warnings.size(), 0);
    ++it->second.second;
    if (!fresh) return;
    warnings.push_back(with_context(d, context));
  };
  for (const Point& p : points)
    for (const Diagnostic& d : p.diagnostics) add_warning(d, "");
  int worst = kExitOk;
  Diagnostics errors;
  for (std::size_t job = 0; job < job_count; ++job) {
    const JobResult& r = results[job];
    for (const Diagnostic& d : r.diagnostics) add_warning(d, "");
    if (r.exit_code != kExitOk && worst == kExitOk) {
      worst = r.exit_code;
      for (const Diagnostic& d : r.diagnostics)
        if (d.severity == Severity::Error) errors.push_back(with_context(d, "at " + job_label(job)));
    }
  }
  for (const auto& [shape, where] : seen)
    if (where.second > 1)
      warnings[where.first].message += " (in " + std::to_string(where.second) + " runs, with their own values)";
  if (worst != kExitOk) {
    Diagnostics all = warnings;
    all.insert(all.end(), errors.begin(), errors.end());
    print_diagnostics(all, options.strict);
    return refuse(worst, all, worst == kExitNumerical ? "numerical failure" : "bad input");
  }
  if (options.strict) {
    for (const Diagnostic& d : warnings)
      if (d.severity == Severity::Warning) {
        print_diagnostics(warnings, true);
        return refuse(kExitBadInput, warnings, "warnings under --strict");
      }
  }
  Diagnostics figure_errors;
  for (std::size_t job = 0; job < job_count; ++job) {
    const JobResult& r = results[job];
    for (std::size_t i = 0; i < r.reports.size(); ++i)
      if (!r.reports[i].ok && figure_errors.size() < 10)
        figure_errors.push_back(make_diagnostic(Severity::Error, base.reports[i].where,
                                                "report " + base.reports[i].name + ": " + r.reports[i].error + " (at " + job_label(job) + ")"));
    for (std::size_t i = 0; i < r.expect_values.size(); ++i)
      if (!r.expect_values[i].ok && figure_errors.size() < 10)
        figure_errors.push_back(make_diagnostic(Severity::Error, base.expects[i].where,
                                                "expect " + base.expects[i].text + ": " + r.expect_values[i].error + " (at " + job_label(job) + ")"));
  }

  // --- Per point summaries -------------------------------------------------------------------
  struct PointSummary {
    long passed = 0;
    std::vector<Stats> reports;
    std::pair<double, double> interval{0, 1};
    bool meets = true;  // no trials: every expect holds; trials: yield >= yield=
  };
  std::vector<PointSummary> summaries(points.size());
  const double required_yield = base.trials ? base.trials->yield : 1.0;
  for (std::size_t p = 0; p < points.size(); ++p) {
    PointSummary& s = summaries[p];
    std::vector<std::vector<double>> values(base.reports.size());
    for (std::size_t t = 0; t < per_point; ++t) {
      const JobResult& r = results[p * per_point + t];
      s.passed += r.pass;
      for (std::size_t i = 0; i < r.reports.size(); ++i)
        if (r.reports[i].ok) values[i].push_back(r.reports[i].value);
    }
    for (const auto& v : values) s.reports.push_back(stats_of(v));
    s.interval = solver::wilson_interval(s.passed, static_cast<long>(per_point), kZ95);
    if (trials.active)
      s.meets = static_cast<double>(s.passed) >= required_yield * static_cast<double>(per_point) * (1 - 1e-12);
    else
      s.meets = s.passed == 1;
  }

  // --- --csv table and --csv-signals -------------------------------------------------------
  const int digits = options.digits;
  std::string table = "";
  {
    std::vector<std::string> head;
    for (const SweepRequest* s : sweeps) head.push_back(s->parameter);
    if (trials.active) {
      head.push_back("trial");
      for (int part : trials.parts) head.push_back(base.parts[static_cast<std::size_t>(part)].name);
    }
    for (const Report& r : base.reports) head.push_back(r.name);
    head.push_back("pass");
    for (std::size_t i = 0; i < head.size(); ++i) table += (i ? "," : "") + csv_field(head[i]);
    table += "\r\n";
    for (std::size_t job = 0; job < job_count; ++job) {
      const JobResult& r = results[job];
      const Point& p = points[job / per_point];
      std::string row;
      for (double v : p.values) row += number(v, digits) + ",";
      if (trials.active) {
        row += std::to_string(job % per_point) + ",";
        for (double v : r.drawn) row += number(v, digits) + ",";
      }
      for (const solver::FigureValue& f : r.reports) row += (f.ok ? number(f.value, digits) : std::string()) + ",";
      row += r.pass ? "1" : "0";
      table += row + "\r\n";
    }
  }
  const bool csv_to_stdout = options.csv == "-";
  std::unique_ptr<AtomicFile> csv_file, signals_file;
  std::string io_error;
  if (!options.csv.empty() && !csv_to_stdout) {
    csv_file = std::make_unique<AtomicFile>(options.csv);
    if (!csv_file->ok() || !write_text(*csv_file, table, io_error)) {
      print_error(csv_file->ok() ? io_error : csv_file->error());
      return refuse(kExitBadInput, {}, "cannot write the CSV");
    }
  }
  if (!options.csv_signals.empty()) {
    signals_file = std::make_unique<AtomicFile>(options.csv_signals);
    if (!signals_file->ok()) {
      print_error(signals_file->error());
      return refuse(kExitBadInput, {}, signals_file->error());
    }
    CsvWriter writer(signals_file->stream(), digits);
    std::vector<std::string> names;
    for (std::size_t job = 0; job < job_count; ++job)
      for (const Signal& s : base.records) names.push_back(s.name + "[" + job_label(job) + "]");
    writer.header(names);
    const std::vector<double>& times = results.front().times;
    std::vector<double> row(names.size());
    for (std::size_t k = 0; k < times.size(); ++k) {
      std::size_t col = 0;
      for (std::size_t job = 0; job < job_count; ++job)
        for (std::size_t s = 0; s < record_count; ++s)
          row[col++] = k < results[job].samples[s].size() ? results[job].samples[s][k] : std::nan("");
      writer.row(times[k], row.data(), row.size());
    }
    if (!writer.flush()) {
      print_error("cannot write '" + options.csv_signals + "': " + std::strerror(errno));
      return refuse(kExitBadInput, {}, "cannot write the signals CSV");
    }
  }
  if (csv_to_stdout) {
    std::fwrite(table.data(), 1, table.size(), stdout);
    std::fflush(stdout);
  }
  for (AtomicFile* f : {csv_file.get(), signals_file.get()}) {
    if (f && !f->commit()) {
      print_error(f->error());
      return refuse(kExitBadInput, {}, "cannot write the CSV");
    }
  }

  // --- Summary -------------------------------------------------------------------------------
  const auto figure = [&](std::size_t report, double value) {
    solver::FigureValue v;
    v.value = value;
    v.unit = base.reports[report].figure.unit;
    return figure_text(base.reports[report].figure, v);
  };
  std::FILE* console = csv_to_stdout ? stderr : stdout;
  const bool print = !ctx.check && !options.quiet;
  std::optional<std::size_t> best_point;
  if (best) {
    for (std::size_t p = 0; p < points.size(); ++p) {
      if (!summaries[p].meets || summaries[p].reports[best->second].n == 0) continue;
      const double v = summaries[p].reports[best->second].mean;
      if (!best_point) {
        best_point = p;
        continue;
      }
      const double b = summaries[*best_point].reports[best->second].mean;
      if (best->first ? v > b : v < b) best_point = p;
    }
  }
  if (print) {
    std::fprintf(console, "%s\n", base.title.empty() ? base.file.c_str() : base.title.c_str());
    if (!base.title.empty()) std::fprintf(console, "  file         %s\n", base.file.c_str());
    std::fprintf(console, "  transient    until=%s every=%s initial=%s\n", format_si(ctx.until, "s").c_str(),
                 format_si(ctx.every, "s").c_str(), ctx.initial_dc ? "dc" : "zero");
    for (const SweepRequest* s : sweeps)
      std::fprintf(console, "  sweep        %s = %s (%zu values)\n", s->parameter.c_str(), s->text.c_str(), s->values.size());
    if (trials.active) {
      const char* spread = base.trials->spread == Spread::Normal ? "normal" : base.trials->spread == Spread::Corners ? "corners" : "uniform";
      std::fprintf(console, "  trials       %ld per point, spread=%s%s, seed=%llu, yield=%s\n", trials.count, spread,
                   trials.enumerate ? " (every combination)" : "", base.trials->seed,
                   (number(required_yield * 100, 6) + " %").c_str());
      std::string names;
      for (int part : trials.parts) {
        const Part& pt = base.parts[static_cast<std::size_t>(part)];
        names += (names.empty() ? "" : ", ") + pt.name + " " + number(*pt.tol * 100, 4) + " %";
      }
      std::fprintf(console, "  toleranced   %s\n", names.c_str());
    }
    const std::string ranks = rank_count() > 1 ? " on each of " + std::to_string(rank_count()) + " ranks" : "";
    std::fprintf(console, "  runs         %zu on %u thread%s%s, %s\n", job_count, std::min<unsigned>(threads, static_cast<unsigned>(job_count)),
                 threads == 1 ? "" : "s", ranks.c_str(), format_si(elapsed(), "s", 3).c_str());
    if (!options.csv.empty()) std::fprintf(console, "  csv          %s\n", csv_to_stdout ? "stdout" : options.csv.c_str());
    if (!options.csv_signals.empty()) std::fprintf(console, "  csv signals  %s\n", options.csv_signals.c_str());

    // The table of points: swept values, each report (trials: its mean), the verdict.
    if (!sweeps.empty()) {
      std::vector<std::vector<std::string>> cells;
      std::vector<std::string> head;
      for (const SweepRequest* s : sweeps) head.push_back(s->parameter);
      for (const Report& r : base.reports) head.push_back(trials.active ? "mean " + r.name : r.name);
      head.push_back(trials.active ? "yield" : "expects");
      cells.push_back(head);
      for (std::size_t p = 0; p < points.size(); ++p) {
        std::vector<std::string> row;
        for (std::size_t k = 0; k < sweeps.size(); ++k)
          row.push_back(format_si(points[p].values[k], sweeps[k]->unit ? unit_symbol(*sweeps[k]->unit) : ""));
        for (std::size_t i = 0; i < base.reports.size(); ++i)
          row.push_back(summaries[p].reports[i].n ? figure(i, summaries[p].reports[i].mean) : "n/a");
        if (trials.active)
          row.push_back(number(100.0 * static_cast<double>(summaries[p].passed) / static_cast<double>(per_point), 4) + " %" +
                        (summaries[p].meets ? "" : " (below)"));
        else if (base.expects.empty())
          row.push_back("-");
        else {
          const JobResult& r = results[p];
          const long failed = std::count(r.expect_pass.begin(), r.expect_pass.end(), false);
          row.push_back(failed == 0 ? "pass" : "FAIL (" + std::to_string(failed) + " of " + std::to_string(r.expect_pass.size()) + ")");
        }
        cells.push_back(row);
      }
      std::vector<std::size_t> width(head.size(), 0);
      for (const auto& row : cells)
        for (std::size_t i = 0; i < row.size(); ++i) width[i] = std::max(width[i], row[i].size());
      std::fprintf(console, "\nSweep (%zu point%s)\n", points.size(), points.size() == 1 ? "" : "s");
      for (const auto& row : cells) {
        std::string line = " ";
        for (std::size_t i = 0; i < row.size(); ++i)
          line += " " + row[i] + std::string(width[i] - row[i].size() + (i + 1 < row.size() ? 1 : 0), ' ');
        while (!line.empty() && line.back() == ' ') line.pop_back();
        std::fprintf(console, "%s\n", line.c_str());
      }
    }
    // Trials: statistics of each report per point, the yield and its interval, histograms.
    if (trials.active) {
      for (std::size_t p = 0; p < points.size(); ++p) {
        const PointSummary& s = summaries[p];
        std::fprintf(console, "\nTrials%s%s (%ld)\n", points[p].label.empty() ? "" : " at ", points[p].label.c_str(), trials.count);
        std::size_t w = 6;
        for (const Report& r : base.reports) w = std::max(w, r.name.size());
        std::fprintf(console, "  %-*s  %-12s %-12s %-12s %-12s\n", static_cast<int>(w), "report", "min", "mean", "max", "sigma");
        for (std::size_t i = 0; i < base.reports.size(); ++i) {
          const Stats& st = s.reports[i];
          if (st.n == 0) {
            std::fprintf(console, "  %-*s  n/a\n", static_cast<int>(w), base.reports[i].name.c_str());
            continue;
          }
          std::fprintf(console, "  %-*s  %-12s %-12s %-12s %-12s\n", static_cast<int>(w), base.reports[i].name.c_str(),
                       figure(i, st.min).c_str(), figure(i, st.mean).c_str(), figure(i, st.max).c_str(),
                       figure(i, st.sigma).c_str());
        }
        std::fprintf(console, "  yield  %ld of %ld = %s %% (95 %% interval %s %% to %s %%, Wilson score)%s\n", s.passed,
                     trials.count, number(100.0 * static_cast<double>(s.passed) / static_cast<double>(trials.count), 4).c_str(),
                     number(100 * s.interval.first, 4).c_str(), number(100 * s.interval.second, 4).c_str(),
                     s.meets ? "" : (", below yield=" + number(required_yield * 100, 6) + " %").c_str());
        // Text histogram of each report over the trials.
        for (std::size_t i = 0; i < base.reports.size(); ++i) {
          const Stats& st = s.reports[i];
          if (st.n < 2 || !(st.max > st.min)) continue;
          std::vector<long> bins(kHistogramBins, 0);
          for (std::size_t t = 0; t < per_point; ++t) {
            const solver::FigureValue& f = results[p * per_point + t].reports[i];
            if (!f.ok) continue;
            int b = static_cast<int>((f.value - st.min) / (st.max - st.min) * kHistogramBins);
            ++bins[static_cast<std::size_t>(std::clamp(b, 0, kHistogramBins - 1))];
          }
          const long most = *std::max_element(bins.begin(), bins.end());
          std::fprintf(console, "  histogram of %s\n", base.reports[i].name.c_str());
          for (int b = 0; b < kHistogramBins; ++b) {
            const double lo = st.min + (st.max - st.min) * b / kHistogramBins;
            const int bar = static_cast<int>(std::lround(static_cast<double>(bins[static_cast<std::size_t>(b)]) * kHistogramWidth / static_cast<double>(most)));
            std::fprintf(console, "    %12s  %-*s %ld\n", figure(i, lo).c_str(), kHistogramWidth,
                         std::string(static_cast<std::size_t>(bar), '#').c_str(), bins[static_cast<std::size_t>(b)]);
          }
        }
      }
    }
    if (best) {
      const std::string& name = base.reports[best->second].name;
      if (best_point)
        std::fprintf(console, "\nbest (%s %s)  %s: %s = %s\n", best->first ? "max" : "min", name.c_str(),
                     points[*best_point].label.empty() ? "the nominal circuit" : points[*best_point].label.c_str(), name.c_str(),
                     figure(best->second, summaries[*best_point].reports[best->second].mean).c_str());
      else
        std::fprintf(console, "\nbest (%s %s)  no point meets every expect\n", best->first ? "max" : "min", name.c_str());
    }
    std::fflush(console);
  }

  // --- Plot: each recorded signal overlaid across the runs -----------------------------------
  int status = kExitOk;
  if (ctx.plot) {
    std::vector<PlotSignal> signals;
    for (std::size_t job = 0; job < job_count; ++job)
      for (const Signal& s : base.records) signals.push_back({s.name + " " + job_label(job), s.unit});
    const std::vector<double>& times = results.front().times;
    PlotData data(std::move(signals), times.size());
    std::vector<double> row(job_count * record_count);
    for (std::size_t k = 0; k < times.size(); ++k) {
      std::size_t col = 0;
      for (std::size_t job = 0; job < job_count; ++job)
        for (std::size_t s = 0; s < record_count; ++s) row[col++] = results[job].samples[s][k];
      data.add(times[k], row.data(), row.size());
    }
    data.finish();
    PlotRequest request;
    request.target = *ctx.plot;
    request.title = base.title.empty() ? base.file : base.title;
    request.t_end = ctx.until;
    std::string error;
    if (!draw_plot(request, data, error)) {
      print_error(error);
      status = kExitBadInput;
    }
  }
  // --- Histogram of each report over the trials (cli/histogram_plot.hpp) ---------------------
  if (ctx.histogram && status == kExitOk) {
    std::string error;
    if (!trials.active) {
      error = "--histogram: no trials ran (no part has tol=)";
    } else {
      HistogramRequest request;
      request.target = *ctx.histogram;
      request.title = base.title.empty() ? base.file : base.title;
      for (const Point& p : points) request.point_labels.push_back(points.size() > 1 ? p.label : "");
      for (std::size_t i = 0; i < base.reports.size(); ++i) {
        HistogramPanel panel;
        panel.name = base.reports[i].name;
        panel.figure = base.reports[i].figure.text;
        panel.unit = base.reports[i].figure.unit;
        panel.values.resize(points.size());
        for (std::size_t job = 0; job < job_count; ++job) {
          if (i >= results[job].reports.size() || !results[job].reports[i].ok) continue;
          const solver::FigureValue& f = results[job].reports[i];
          panel.values[job / per_point].push_back(f.value);
          if (!panel.unit) panel.unit = f.unit;
        }
        for (const Expect& e : base.expects)
          if (!panel.limit && e.figure.text == panel.figure && e.op != CompareOp::Equal) {
            panel.limit = e.value;
            panel.limit_label = limit_text(e);
          }
        request.panels.push_back(std::move(panel));
      }
      if (draw_histograms(request, error)) error.clear();
      else if (error.empty()) error = "--histogram: gnuplot failed";
    }
    if (!error.empty()) {
      print_error(error);
      status = kExitBadInput;
    }
  }
  print_diagnostics(warnings, false);
  print_diagnostics(figure_errors, false);
  if (!figure_errors.empty()) status = kExitBadInput;
  // The mains caution, once: for the first run whose samples leave the band, with how many do.
  {
    std::size_t hazardous = 0, first = results.size();
    for (std::size_t k = 0; k < results.size(); ++k)
      if (results[k].hazard) {
        ++hazardous;
        if (first == results.size()) first = k;
      }
    if (hazardous > 0 && !ctx.safety.accept_risk) {
      std::fprintf(stderr, "%zu of %zu runs leave the extra-low-voltage band (on their samples); the first is %s:\n",
                   hazardous, results.size(), job_label(first).empty() ? "the nominal circuit" : job_label(first).c_str());
      std::fputs(caution_text(*results[first].hazard).c_str(), stderr);
    }
    out.json["cautions"] = {{"hazardous_runs", hazardous}, {"runs", results.size()}};
  }

  // --- Verdicts ------------------------------------------------------------------------------
  // Sweeps: every point must meet every expect. Trials: every point's yield must reach
  // yield= (default 100 %).
  Diagnostics failed;
  int failed_count = 0;
  if (trials.active) {
    for (std::size_t p = 0; p < points.size(); ++p) {
      if (summaries[p].meets) continue;
      ++failed_count;
      failed.push_back(make_diagnostic(
          Severity::Error, base.trials->where,
          "yield " + number(100.0 * static_cast<double>(summaries[p].passed) / static_cast<double>(per_point), 4) +
              " % (" + std::to_string(summaries[p].passed) + " of " + std::to_string(per_point) + " trials) is below yield=" +
              number(required_yield * 100, 6) + " %" + (points[p].label.empty() ? "" : " at " + points[p].label)));
    }
  } else {
    for (std::size_t i = 0; i < base.expects.size(); ++i) {
      std::size_t first = points.size();
      long count = 0;
      for (std::size_t p = 0; p < points.size(); ++p)
        if (i < results[p].expect_pass.size() && !results[p].expect_pass[i] && results[p].expect_values[i].ok) {
          if (first == points.size()) first = p;
          ++count;
        }
      if (count == 0) continue;
      failed_count += static_cast<int>(count);
      const solver::FigureValue& v = results[first].expect_values[i];
      failed.push_back(make_diagnostic(
          Severity::Error, base.expects[i].where,
          "expect failed at " + std::to_string(count) + " of " + std::to_string(points.size()) + " points, first at " +
              points[first].label + ": " + base.expects[i].figure.text + " = " + figure_text(base.expects[i].figure, v) +
              ", the limit is " + limit_text(base.expects[i])));
    }
  }
  if (ctx.check) print_diagnostics(failed, false);
  out.failed_expects = failed_count;
  if (ctx.check && status == kExitOk && failed_count > 0) status = kExitDiffers;
  out.exit_code = status;

  // --- JSON and JUnit ------------------------------------------------------------------------
  nlohmann::json& j = out.json;
  j["exit_code"] = status;
  j["analyses"]["transient"] = {{"until", ctx.until}, {"every", ctx.every}, {"initial", ctx.initial_dc ? "dc" : "zero"}};
  nlohmann::json sweep_json = nlohmann::json::array();
  for (const SweepRequest* s : sweeps)
    sweep_json.push_back({{"parameter", s->parameter}, {"list", s->text}, {"unit", s->unit ? unit_symbol(*s->unit) : ""}, {"values", s->values}});
  j["analyses"]["sweeps"] = sweep_json;
  if (trials.active) {
    const char* spread = base.trials->spread == Spread::Normal ? "normal" : base.trials->spread == Spread::Corners ? "corners" : "uniform";
    nlohmann::json parts = nlohmann::json::array();
    for (int part : trials.parts)
      parts.push_back({{"name", base.parts[static_cast<std::size_t>(part)].name}, {"tol", *base.parts[static_cast<std::size_t>(part)].tol}});
    j["analyses"]["trials"] = {{"runs", trials.count}, {"seed", base.trials->seed}, {"spread", spread},
                               {"every_combination", trials.enumerate}, {"yield", required_yield}, {"toleranced", parts}};
  }
  nlohmann::json pts = nlohmann::json::array();
  for (std::size_t p = 0; p < points.size(); ++p) {
    nlohmann::json pj;
    for (std::size_t k = 0; k < sweeps.size(); ++k) pj["values"][sweeps[k]->parameter] = points[p].values[k];
    nlohmann::json reports = nlohmann::json::object();
    for (std::size_t i = 0; i < base.reports.size(); ++i) {
      const Stats& st = summaries[p].reports[i];
      const std::string unit = base.reports[i].figure.unit ? unit_symbol(*base.reports[i].figure.unit) : "";
      if (trials.active)
        reports[base.reports[i].name] = st.n ? nlohmann::json{{"min", st.min}, {"mean", st.mean}, {"max", st.max}, {"sigma", st.sigma}, {"unit", unit}} : nlohmann::json();
      else
        reports[base.reports[i].name] = st.n ? nlohmann::json{{"value", st.mean}, {"unit", unit}} : nlohmann::json();
    }
    pj["reports"] = reports;
    if (trials.active) {
      pj["passed"] = summaries[p].passed;
      pj["yield"] = static_cast<double>(summaries[p].passed) / static_cast<double>(per_point);
      pj["yield_interval_95"] = {summaries[p].interval.first, summaries[p].interval.second};
    } else {
      nlohmann::json ex = nlohmann::json::array();
      for (std::size_t i = 0; i < base.expects.size(); ++i)
        ex.push_back({{"expect", base.expects[i].text},
                      {"value", results[p].expect_values[i].ok ? nlohmann::json(results[p].expect_values[i].value) : nlohmann::json()},
                      {"pass", static_cast<bool>(results[p].expect_pass[i])}});
      pj["expects"] = ex;
    }
    pj["pass"] = summaries[p].meets;
    pts.push_back(pj);
  }
  j["points"] = pts;
  if (best) {
    j["best"] = {{"goal", best->first ? "max" : "min"}, {"report", base.reports[best->second].name}};
    if (best_point) {
      j["best"]["point"] = best_point.has_value() ? pts[*best_point]["values"] : nlohmann::json();
      j["best"]["value"] = summaries[*best_point].reports[best->second].mean;
    }
  }
  Diagnostics all = warnings;
  all.insert(all.end(), figure_errors.begin(), figure_errors.end());
  all.insert(all.end(), failed.begin(), failed.end());
  j["diagnostics"] = diagnostics_json(all);
  j["run_time"] = {{"total", elapsed()}, {"threads", threads}};
  if (rank_count() > 1) j["run_time"]["ranks"] = rank_count();

  if (trials.active) {
    for (std::size_t p = 0; p < points.size(); ++p) {
      JUnitCase c;
      c.name = "yield" + (points[p].label.empty() ? std::string() : " at " + points[p].label);
      c.classname = base.file;
      if (!summaries[p].meets) {
        c.failed = true;
        c.message = std::to_string(summaries[p].passed) + " of " + std::to_string(per_point) + " trials meet every expect, below yield=" +
                    number(required_yield * 100, 6) + " %";
      }
      out.junit.cases.push_back(c);
    }
  } else {
    for (std::size_t i = 0; i < base.expects.size(); ++i) {
      JUnitCase c;
      c.name = "expect " + base.expects[i].text;
      c.classname = base.file;
      for (const Diagnostic& d : failed)
        if (d.where.line == base.expects[i].where.line && d.where.file == base.expects[i].where.file) {
          c.failed = true;
          c.message = d.message;
        }
      out.junit.cases.push_back(c);
    }
  }
  out.junit.seconds = elapsed();
  return out;
}

}  // namespace ringdown::cli
