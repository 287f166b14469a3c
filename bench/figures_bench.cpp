// figures_bench: what a typical set of figures costs on the exact engine's dense output,
// as a ratio to the run itself, measured in one process.
//
//   figures_bench FILE.rlc [--signal NAME] [--energy PART] [--reps N]
//     run_s        best time of run_transient without dense output (the baseline);
//     dense_run_s  the same run with dense output (checkpoints kept);
//     <figure>_s   each of max, tmax, rise, settle, overshoot, ringfreq on the signal
//                  (default: the first recorded), and energy(PART) (default: none);
//     figures_s    their sum, and figures_over_run = figures_s / run_s.
// Output: key=value pairs, one per line.
//
// What it does not: check values (the tests do) or compare with other programs.
#include <algorithm>
#include <chrono>
#include <cstdio>
#include <cstdlib>
#include <cstring>
#include <limits>
#include <optional>
#include <string>
#include <vector>

#include "parser/load.hpp"
#include "solver/figures.hpp"
#include "solver/transient.hpp"

namespace {

using Clock = std::chrono::steady_clock;
double since(Clock::time_point t0) { return std::chrono::duration<double>(Clock::now() - t0).count(); }

}  // namespace

int main(int argc, char** argv) {
  if (argc < 2) {
    std::fputs("usage: figures_bench FILE.rlc [--signal NAME] [--energy PART] [--reps N]\n", stderr);
    return 2;
  }
  std::string file = argv[1], signal_name, energy_part;
  int reps = 3;
  for (int i = 2; i + 1 < argc; i += 2) {
    if (!std::strcmp(argv[i], "--signal")) signal_name = argv[i + 1];
    if (!std::strcmp(argv[i], "--energy")) energy_part = argv[i + 1];
    if (!std::strcmp(argv[i], "--reps")) reps = std::atoi(argv[i + 1]);
  }
  auto loaded = ringdown::load_file(file);
  if (!loaded.ok()) {
    for (const auto& d : loaded.diagnostics) std::fputs(ringdown::render(d).c_str(), stderr);
    return 2;
  }
  const ringdown::Circuit& c = *loaded.circuit;
  if (!c.transient) return 2;
  ringdown::solver::TransientOptions opt;
  opt.until = c.transient->until;
  opt.every = c.transient->every;
  opt.initial_dc = c.transient->initial_dc;
  std::size_t signal = 0;
  for (std::size_t k = 0; k < c.records.size(); ++k)
    if (c.records[k].name == signal_name) signal = k;
  int part = -1;
  for (std::size_t p = 0; p < c.parts.size(); ++p)
    if (c.parts[p].name == energy_part) part = static_cast<int>(p);
  if (part >= 0) {
    for (auto q : {ringdown::Quantity::Voltage, ringdown::Quantity::Current}) {
      ringdown::Signal s;
      s.name = energy_part;
      s.expr.op = ringdown::SignalExpr::Op::PartQuantity;
      s.expr.index = part;
      s.expr.quantity = q;
      opt.trajectory_signals.push_back(s);
    }
  }
  const auto sink = [](double, const double*, std::size_t) {};
  double run_s = std::numeric_limits<double>::infinity();
  for (int r = 0; r < reps; ++r) {
    ringdown::Diagnostics d;
    const auto t0 = Clock::now();
    ringdown::solver::run_transient(c, c.records, opt, sink, d);
    run_s = std::min(run_s, since(t0));
  }
  opt.dense_output = true;
  ringdown::solver::TransientSummary sum;
  double dense_s = std::numeric_limits<double>::infinity();
  for (int r = 0; r < reps; ++r) {
    ringdown::Diagnostics d;
    const auto t0 = Clock::now();
    sum = ringdown::solver::run_transient(c, c.records, opt, sink, d);
    dense_s = std::min(dense_s, since(t0));
  }
  if (!sum.trajectory) return 3;
  std::printf("file=%s\nstates=%zu\nsamples=%zu\nbracket_step=%g\nrun_s=%.6f\ndense_run_s=%.6f\n",
              file.c_str(), sum.states, sum.samples, sum.trajectory->bracket_step(), run_s, dense_s);
  double total = 0;
  for (const char* f : {"max", "tmax", "rise", "settle", "overshoot", "ringfreq", "energy"}) {
    ringdown::FigureCall call;
    call.function = f;
    std::optional<std::pair<std::size_t, std::size_t>> power;
    if (!std::strcmp(f, "energy")) {
      if (part < 0) continue;
      power = std::make_pair(c.records.size(), c.records.size() + 1);
    } else {
      call.signal = c.records[signal];
    }
    // A fresh trajectory per figure would hide the propagator cache; the figures of one run
    // share one trajectory, as they do in the CLI.
    const auto t0 = Clock::now();
    const auto v = ringdown::solver::evaluate_figure(call, *sum.trajectory, signal, power);
    const double s = since(t0);
    total += s;
    std::printf("%s_s=%.6f\n%s=%.10g%s\n", f, s, f, v.value, v.ok ? "" : " (error)");
  }
  std::printf("figures_s=%.6f\nfigures_over_run=%.3f\n", total, total / run_s);
  return 0;
}
