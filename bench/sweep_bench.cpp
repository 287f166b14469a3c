// Sweeps and trials benchmark (issue 6 targets): points per second of a 200-point sweep of
// the flyback snubber (circuits/flyback_snubber.rlc, Rsnub swept geometrically) serial
// against 2 threads; 10,000 trials of a 20-element LC ladder filter with 2,000 output
// samples each on 2 threads; and what a point costs when its circuit is rebuilt from the
// text (load_text: read + parse + elaborate, what a sweep point did before parse-once),
// elaborated from a kept parse (parser/load.hpp elaborate(): what a sweep point does) and
// restamped from an already elaborated circuit (copy + scale values, what a trial does),
// each next to the engine run that follows it. Sections 1 and 2 go through the same entry
// as the `ringdown` binary (cli::run_loaded with cli::parse_once, as `run` builds it) with
// --quiet, so printing is not timed.
//
// Not a test: prints a table of times and ratios measured in this one run.
//
//   sweep_bench [SOURCE_DIR] [--quick]   (--quick: 40 points, 1,000 trials)
#include <algorithm>
#include <chrono>
#include <limits>
#include <cstdio>
#include <fstream>
#include <sstream>
#include <string>
#include <utility>
#include <vector>

#include "cli/run.hpp"
#include "cli/sweep.hpp"
#include "mna/descriptor.hpp"
#include "parser/load.hpp"
#include "solver/draws.hpp"
#include "solver/transient.hpp"

namespace {

using Clock = std::chrono::steady_clock;
double seconds_since(Clock::time_point t0) { return std::chrono::duration<double>(Clock::now() - t0).count(); }

std::string read_file(const std::string& path) {
  std::ifstream in(path);
  std::stringstream s;
  s << in.rdbuf();
  return s.str();
}

// A 9th-order LC ladder (low-pass) between 50 Ohm terminations: Rs, 9 L/C sections, RL =
// 20 elements, each with tol=5 %. 2,000 output samples.
std::string ladder(int trials) {
  std::string t = "title \"20-element ladder\"\nvoltage Vs src gnd step(from=0, to=2V, at=1us)\n";
  t += "resistor Rs src n0 50 tol=1%\n";
  for (int k = 0; k < 9; ++k) {
    const std::string a = "n" + std::to_string(k), b = "n" + std::to_string(k + 1);
    if (k % 2 == 0) t += "capacitor C" + std::to_string(k) + " " + a + " gnd 30nF tol=5%\nresistor Rx" + std::to_string(k) + " " + a + " " + b + " 1m\n";
    else t += "inductor L" + std::to_string(k) + " " + a + " " + b + " 150uH tol=5%\n";
  }
  t += "resistor RL n9 gnd 50 tol=1%\n";
  t += "transient until=200us every=100ns\nrecord n9\nreport tr = rise(n9)\nreport os = overshoot(n9)\n";
  t += "expect overshoot(n9) < 20%\n";
  if (trials > 0) t += "trials runs=" + std::to_string(trials) + " seed=1\n";
  return t;
}

double run_cli(const std::string& text, const std::string& name, int jobs, const std::vector<std::string>& set = {}) {
  ringdown::cli::RunOptions o;
  o.file = name;
  o.quiet = true;
  o.no_progress = true;
  o.accept_mains_risk = true;
  o.jobs = jobs;
  o.set = set;
  const auto t0 = Clock::now();
  const int code = ringdown::cli::run_loaded(o, ringdown::cli::parse_once([&] { return ringdown::parse_text(text, name); }));
  const double s = seconds_since(t0);
  if (code != 0) std::fprintf(stderr, "sweep_bench: %s exited %d\n", name.c_str(), code);
  return s;
}

}  // namespace

int main(int argc, char** argv) {
  std::string source = ".";
  bool quick = false;
  for (int i = 1; i < argc; ++i) {
    const std::string a = argv[i];
    if (a == "--quick") quick = true;
    else source = a;
  }
  const int points = quick ? 40 : 200;
  const int trials = quick ? 1000 : 10000;

  // --- 1. 200-point sweep of the snubber, serial vs 2 threads -----------------------------
  const std::string snubber = read_file(source + "/circuits/flyback_snubber.rlc");
  if (snubber.empty()) {
    std::fprintf(stderr, "sweep_bench: cannot read %s/circuits/flyback_snubber.rlc\n", source.c_str());
    return 2;
  }
  const std::vector<std::string> sweep = {"Rsnub=geometric(20Ohm, 200Ohm, " + std::to_string(points) + ")"};
  const double serial = run_cli(snubber, "flyback_snubber.rlc", 1, sweep);
  const double parallel = run_cli(snubber, "flyback_snubber.rlc", 2, sweep);

  // --- 2. 10,000 trials of the 20-element ladder on 2 threads -----------------------------
  const std::string filter = ladder(trials);
  const double trials_time = run_cli(filter, "ladder.rlc", 2);

  // --- 3. rebuild from the text vs elaborate from a parse vs restamp, per point ------------
  // The ladder with its load as a parameter, so that a point overrides it as a sweep does
  // (the value text as cli/sweep.cpp writes it: 17 digits and the unit).
  std::string nominal = "Rterm = 50Ohm\n" + ladder(0);
  nominal.replace(nominal.find("resistor RL n9 gnd 50"), 21, "resistor RL n9 gnd Rterm");
  const std::vector<std::pair<std::string, std::string>> point = {{"Rterm", "5.0000000000000000e+01Ohm"}};
  const int reps = quick ? 250 : 1000;
  ringdown::LoadResult base = ringdown::load_text(nominal, "ladder.rlc");
  if (!base.ok()) return 2;
  // Each figure is the best per-call time over 5 blocks of calls: the machine is shared, and
  // a mean would take in other processes' bursts (a block of rebuilds against one of
  // elaborations could then differ by 2x either way).
  const int blocks = 5;
  const auto best_per_call = [blocks](int n, const auto& call) {
    double best = std::numeric_limits<double>::infinity();
    for (int b = 0; b < blocks; ++b) {
      const auto t0 = Clock::now();
      for (int k = 0; k < n; ++k) call(k);
      best = std::min(best, seconds_since(t0) / n);
    }
    return best;
  };
  std::size_t sink_elements = 0;
  const auto parsed = ringdown::parse_text(nominal, "ladder.rlc");
  ringdown::LoadOptions lo;
  lo.overrides = point;
  const auto rebuild_call = [&](int) {
    ringdown::LoadResult r = ringdown::load_text(nominal, "ladder.rlc", lo);
    sink_elements += r.circuit->elements.size();
  };
  // Elaborate from one parse with the same override.
  const auto elaborate_call = [&](int) {
    ringdown::LoadResult r = ringdown::elaborate(*parsed, lo);
    sink_elements += r.circuit->elements.size();
  };
  const auto restamp_call = [&](int k) {
    ringdown::Circuit c = *base.circuit;
    std::uint64_t e = 0;
    for (const ringdown::Part& p : c.parts)
      if (p.tol) c.elements[static_cast<std::size_t>(p.main)].value *= ringdown::solver::draw_factor(ringdown::solver::DrawSpread::Uniform, *p.tol, 1, static_cast<std::uint64_t>(k), e++, false);
    sink_elements += c.elements.size();
  };
  const double rebuild = best_per_call(reps / blocks, rebuild_call);
  const double elaborated = best_per_call(reps / blocks, elaborate_call);
  const double restamp = best_per_call(reps / blocks, restamp_call);
  // The engine's structural work per run: the MNA network's analysis (topology checks,
  // unknown layout, input and switch lists) against stamping the values into it, which is
  // all a run with a kept structure would redo.
  const double analyse = best_per_call(reps / blocks, [&](int) {
    ringdown::Diagnostics d;
    const auto net = ringdown::mna::Network::analyse(*base.circuit, false, d);
    sink_elements += static_cast<std::size_t>(net ? net->unknowns() : 0);
  });
  ringdown::Diagnostics nd;
  const auto net = ringdown::mna::Network::analyse(*base.circuit, false, nd);
  if (!net) return 2;
  const double stamp = best_per_call(reps / blocks, [&](int) {
    const ringdown::mna::Descriptor dsc = net->stamp(*base.circuit, net->initial_switches());
    sink_elements += static_cast<std::size_t>(dsc.C.rows());
  });
  ringdown::solver::TransientOptions engine;
  engine.until = base.circuit->transient->until;
  engine.every = base.circuit->transient->every;
  engine.dense_output = true;
  const double engine_run = best_per_call(std::max(1, reps / 4 / blocks), [&](int) {
    ringdown::Diagnostics d;
    ringdown::solver::run_transient(*base.circuit, base.circuit->records, engine, [](double, const double*, std::size_t) {}, d);
  });

  std::printf("sweep and trials benchmark (%s)\n", quick ? "quick" : "full");
  std::printf("| figure | measured | target |\n|---|---|---|\n");
  std::printf("| %d-point snubber sweep, 1 thread | %.1f points/s (%.2f s) | |\n", points, points / serial, serial);
  std::printf("| %d-point snubber sweep, 2 threads | %.1f points/s (%.2f s) | |\n", points, points / parallel, parallel);
  std::printf("| speed-up, 2 threads vs 1 | %.2fx | >= 1.7x |\n", serial / parallel);
  std::printf("| %d trials, 20-element ladder, 2000 samples, 2 threads | %.2f s (%.0f trials/s) | < 10 s |\n", trials, trials_time, trials / trials_time);
  std::printf("| per point: rebuild from text (load_text) | %.1f us | |\n", rebuild * 1e6);
  std::printf("| per point: elaborate from parsed source | %.1f us | |\n", elaborated * 1e6);
  std::printf("| per point: restamp (copy + scale values) | %.1f us | |\n", restamp * 1e6);
  std::printf("| per point: the engine run with figures' dense output | %.1f us | |\n", engine_run * 1e6);
  std::printf("| per run: MNA analysis (topology checks, layout) | %.1f us | |\n", analyse * 1e6);
  std::printf("| per run: MNA stamp of the values | %.1f us | |\n", stamp * 1e6);
  std::printf("| rebuild / restamp | %.1fx | |\n", rebuild / restamp);
  std::printf("| rebuild from text / elaborate from parsed | %.2fx | |\n", rebuild / elaborated);
  std::printf("| elaborate / restamp | %.1fx | |\n", elaborated / restamp);
  std::printf("| MNA analysis / stamp | %.1fx | |\n", analyse / stamp);
  std::printf("| engine / (engine - MNA analysis + stamp): saving of a kept structure | %.3fx | |\n",
              engine_run / (engine_run - analyse + stamp));
  std::printf("| (rebuild + engine) / (restamp + engine) | %.3fx | |\n", (rebuild + engine_run) / (restamp + engine_run));
  std::printf("| (elaborate + engine) / (restamp + engine) | %.3fx | |\n", (elaborated + engine_run) / (restamp + engine_run));
  std::printf("| (rebuild + engine) / (elaborate + engine): saving of parse-once per point | %.3fx | |\n",
              (rebuild + engine_run) / (elaborated + engine_run));
  return sink_elements == 0;
}
