// formula_bench: what fitting formula() sources costs, for docs/method.md "Formula sources".
//
//   formula_bench fit      per degree policy and formula: pieces, formula evaluations, fit
//                          time, the reported estimate and the true error (the fit against
//                          the formula at 64 points per piece), all relative to the peak;
//   formula_bench engine   the same RC low-pass driven by sine(...) and by the same sine
//                          written as formula(...), at several output densities: best of 5
//                          engine times, their ratio, the fit's share, the estimate and the
//                          largest difference of the two outputs.
// Every figure is a ratio or a count within one run (the machines are shared and noisy);
// times are this thread's CPU time, best of several repetitions.
//
// What it does not: pass/fail, or compare with other programs.
#include <algorithm>
#include <cmath>
#include <cstdint>
#include <cstdio>
#include <cstring>
#include <ctime>
#include <limits>
#include <numbers>
#include <string>
#include <vector>

#include "parser/load.hpp"
#include "solver/formula_fit.hpp"
#include "solver/transient.hpp"

namespace {

// CPU time of this thread: the machines are shared, and wall time counts the others' work.
struct Clock {
  using time_point = double;
  static double now() {
    timespec ts{};
    clock_gettime(CLOCK_THREAD_CPUTIME_ID, &ts);
    return static_cast<double>(ts.tv_sec) + 1e-9 * static_cast<double>(ts.tv_nsec);
  }
};
namespace solver = ringdown::solver;
constexpr double kPi = std::numbers::pi;

double seconds_since(Clock::time_point start) { return Clock::now() - start; }

struct Case {
  const char* name;
  double (*f)(double);
  double every;
  double until;
  double tol = 1e-9;
};

double sine_f(double t) { return 2 * std::sin(2 * kPi * 1e3 * t); }
double abs_sine(double t) { return std::fabs(std::sin(2 * kPi * 1.1e3 * t)); }
double approach_f(double t) { return 5 * (1 - std::exp(-t / 2e-6)); }
double steep(double t) { return std::min(1.0, std::max(0.0, (t - 1.234567e-3) * 1e15)); }
double fast_sine(double t) { return std::sin(2 * kPi * 1e6 * t); }
// A sine with rounding noise of 1e-12 of its amplitude (a deterministic hash of t).
double noisy_sine(double t) {
  std::uint64_t u;
  std::memcpy(&u, &t, sizeof u);
  u ^= u >> 33;
  u *= 0xff51afd7ed558ccdULL;
  u ^= u >> 33;
  const double r = static_cast<double>(u >> 11) * 0x1.0p-53 - 0.5;
  return std::sin(2 * kPi * 1e3 * t) * (1 + 2e-12 * r);
}
double chirp(double t) { return std::sin(2 * kPi * (1e3 + 2e5 * t) * t); }

int fit_table() {
  const Case cases[] = {
      {"sine, 1000/period", sine_f, 1e-6, 5e-3},
      {"sine, 100/period", sine_f, 1e-5, 5e-3},
      {"sine, 20/period", sine_f, 5e-5, 5e-3},
      {"sine, 5/period", sine_f, 2e-4, 5e-3},
      {"sine, 1/4 per period", sine_f, 4e-3, 20e-3},
      {"approach tau=2us, H=0.1us", approach_f, 1e-7, 20e-6},
      {"chirp 1k..3kHz, H=10us", chirp, 1e-5, 5e-3},
      {"abs(sine 1.1k), H=10us", abs_sine, 1e-5, 5e-3},
      {"steep ramp (1 fs), H=10us", steep, 1e-5, 5e-3},
      {"sine 1MHz, H=100us", fast_sine, 1e-4, 1e-3},
      {"sine + 1e-12 noise, tol 1e-9", noisy_sine, 1e-5, 5e-3},
      {"sine + 1e-12 noise, tol 1e-13", noisy_sine, 1e-5, 5e-3, 1e-13},
  };
  struct Policy {
    int degree;
    bool raise;
  };
  const Policy policies[] = {{3, false}, {3, true}, {1, true}, {2, true}, {4, true}};
  std::printf("%-31s %-8s %9s %9s %9s %10s %10s\n", "formula", "degrees", "pieces", "evals",
              "fit_us", "estimate", "true_err");
  for (const Case& c : cases) {
    auto w = ringdown::make_formula(c.f, c.name);
    for (const Policy& policy : policies) {
      solver::FormulaFitOptions o;
      o.every = c.every;
      o.t_end = std::round(c.until / c.every) * c.every;
      o.tolerance = c.tol;
      o.resolution = 16 * std::numeric_limits<double>::epsilon() * o.t_end;
      o.degree = policy.degree;
      o.raise = policy.raise;
      double best = std::numeric_limits<double>::infinity();
      solver::FormulaFitResult r;
      for (int rep = 0; rep < 3; ++rep) {
        const auto start = Clock::now();
        r = solver::fit_formula(w, o);
        best = std::min(best, seconds_since(start));
      }
      double true_err = 0;
      const auto& fit = *r.waveform;
      for (std::size_t i = 0; i < fit.pieces(); ++i) {
        const double a = fit.knot(i), b = fit.knot(i + 1);
        for (int k = 0; k <= 64; ++k) {
          const double t = k == 64 ? std::nextafter(b, a) : a + (b - a) * k / 64;
          true_err = std::max(true_err, std::fabs(fit.value(t) - c.f(t)));
        }
      }
      const std::string d = std::to_string(policy.degree) +
                            (policy.raise ? "," + std::to_string(2 * policy.degree) : "");
      std::printf("%-31s %-8s %9zu %9zu %9.0f %10.2e %10.2e\n", c.name, d.c_str(), r.pieces,
                  r.evaluations, best * 1e6, r.error, true_err / r.peak);
    }
  }
  return 0;
}

struct Timed {
  double seconds = std::numeric_limits<double>::infinity();
  double fit_seconds = 0;  // the fit alone, of the first formula source (0: none)
  std::size_t pieces = 0, evaluations = 0;
  solver::SampledRun run;
};

Timed time_run(const std::string& text, int reps) {
  auto loaded = ringdown::load_text(text, "bench.rlc");
  if (!loaded.ok()) {
    for (const auto& d : loaded.diagnostics) std::fputs(ringdown::render(d).c_str(), stderr);
    std::exit(2);
  }
  const ringdown::Circuit& c = *loaded.circuit;
  solver::TransientOptions opt;
  opt.until = c.transient->until;
  opt.every = c.transient->every;
  Timed out;
  for (int r = 0; r < reps; ++r) {
    ringdown::Diagnostics d;
    const auto start = Clock::now();
    auto run = solver::run_transient_sampled(c, c.records, opt, d);
    out.seconds = std::min(out.seconds, seconds_since(start));
    if (run.summary.status != solver::Status::Ok) {
      for (const auto& x : d) std::fputs(ringdown::render(x).c_str(), stderr);
      std::exit(3);
    }
    out.run = std::move(run);
  }
  for (const auto& e : c.elements) {
    if (!e.waveform || e.waveform->is_exact()) continue;
    solver::FormulaFitOptions o;
    o.every = opt.every;
    o.t_end = static_cast<double>(out.run.time.size() - 1) * opt.every;
    o.resolution = 16 * std::numeric_limits<double>::epsilon() * o.t_end;
    out.fit_seconds = std::numeric_limits<double>::infinity();
    for (int r = 0; r < reps; ++r) {
      const auto start = Clock::now();
      const auto fit = solver::fit_formula(e.waveform, o);
      out.fit_seconds = std::min(out.fit_seconds, seconds_since(start));
      out.pieces = fit.pieces;
      out.evaluations = fit.evaluations;
    }
    break;
  }
  return out;
}

int engine_table() {
  constexpr int kReps = 11;
  std::printf("%-12s %8s %10s %10s %7s %8s %8s %8s %10s %10s\n", "per_period", "samples",
              "exact_ms", "formula_ms", "ratio", "fit_ms", "pieces", "evals", "estimate",
              "max_diff");
  for (int per_period : {1000, 100, 50, 20, 5}) {
    const double every = 1e-3 / per_period;
    const long samples = 200L * per_period;  // 200 periods of 1 kHz
    const auto circuit = [&](const std::string& source) {
      char buf[512];
      std::snprintf(buf, sizeof buf,
                    "voltage V1 in gnd %s\nresistor R1 in out 1k\ncapacitor C1 out gnd 100n\n"
                    "transient until=%.17g every=%.17g\nrecord out\n",
                    source.c_str(), static_cast<double>(samples) * every, every);
      return std::string(buf);
    };
    const Timed exact = time_run(circuit("sine(freq=1k, amp=2)"), kReps);
    const Timed formula = time_run(circuit("formula(2*sin(2*pi*1k*t))"), kReps);
    double diff = 0;
    for (std::size_t k = 0; k < exact.run.time.size(); ++k)
      diff = std::max(diff, std::fabs(exact.run.values[0][k] - formula.run.values[0][k]));
    std::printf("%-12d %8ld %10.3f %10.3f %7.2f %8.3f %8zu %8zu %10.2e %10.2e\n", per_period,
                samples, exact.seconds * 1e3, formula.seconds * 1e3,
                formula.seconds / exact.seconds, formula.fit_seconds * 1e3, formula.pieces,
                formula.evaluations, formula.run.summary.formula_error, diff / 2);
  }
  return 0;
}

}  // namespace

int main(int argc, char** argv) {
  const std::string what = argc > 1 ? argv[1] : "";
  if (what == "fit") return fit_table();
  if (what == "engine") return engine_table();
  std::fputs("usage: formula_bench fit|engine\n", stderr);
  return 2;
}
