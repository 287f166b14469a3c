// engine_bench: wall-clock figures of ringdown's exact engine, for bench/run_bench.sh.
//
//   engine_bench run FILE.rlc [--reps N] [--dump PATH] [--marginal]
//     parse_s   best load_file time over N repetitions;
//     engine_s  best time of solver::run_transient_sampled (parsed circuit -> last sample
//               held in memory: reduction, propagators, every sample);
//     marginal_s (with --marginal) per-sample propagation cost, (T(2N) - T(N)) / N with the
//               run streamed to a sink that sums the values (so they are used, but no
//               row is stored: storing 1e6 rows is memory traffic, not propagation, and is
//               in engine_s), so set-up cancels out;
//     --dump writes the in-memory samples as raw doubles, row-major [t, signals...].
//   engine_bench matvec N [--fixed]
//     seconds per bare dense matrix-vector product y = Phi x of size N, Eigen dynamic-size
//     (or fixed-size for N = 2..8 with --fixed): the floor a propagator step can reach.
//     The fastest of 10 measurements of 50 ms each (the engine's figures are the best of
//     --reps runs too).
// Output: one line of key=value pairs, read by bench/lsim_bench.py.
//
// What it does not: compare with anything (lsim_bench.py does) or check results.
#include <Eigen/Dense>
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
#include "solver/transient.hpp"

namespace {

using Clock = std::chrono::steady_clock;

double seconds_since(Clock::time_point start) {
  return std::chrono::duration<double>(Clock::now() - start).count();
}

void print_errors(const ringdown::Diagnostics& diagnostics) {
  for (const auto& d : diagnostics)
    if (d.severity == ringdown::Severity::Error) std::fputs(ringdown::render(d).c_str(), stderr);
}

// Streams `run_transient` to a sink that sums every value; returns the wall time.
double streamed_run(const ringdown::Circuit& circuit, ringdown::solver::TransientOptions options,
                    double& checksum, std::size_t& rows) {
  rows = 0;
  ringdown::Diagnostics diagnostics;
  auto start = Clock::now();
  auto summary = ringdown::solver::run_transient(
      circuit, circuit.records, options,
      [&](double t, const double* values, std::size_t count) {
        double sum = t;
        for (std::size_t i = 0; i < count; ++i) sum += values[i];
        checksum += sum;
        ++rows;
      },
      diagnostics);
  double s = seconds_since(start);
  if (summary.status != ringdown::solver::Status::Ok) {
    print_errors(diagnostics);
    std::exit(3);
  }
  return s;
}

int run_case(const std::string& file, int reps, const std::string& dump, bool marginal) {
  double parse_best = std::numeric_limits<double>::infinity();
  std::optional<ringdown::Circuit> circuit;
  for (int r = 0; r < reps; ++r) {
    auto start = Clock::now();
    auto loaded = ringdown::load_file(file);
    parse_best = std::min(parse_best, seconds_since(start));
    if (!loaded.ok()) {
      print_errors(loaded.diagnostics);
      return 2;
    }
    circuit = std::move(loaded.circuit);
  }
  if (!circuit->transient) {
    std::fprintf(stderr, "%s: no transient statement\n", file.c_str());
    return 2;
  }
  ringdown::solver::TransientOptions options;
  options.until = circuit->transient->until;
  options.every = circuit->transient->every;
  options.initial_dc = circuit->transient->initial_dc;

  double engine_best = std::numeric_limits<double>::infinity();
  ringdown::solver::SampledRun kept;
  for (int r = 0; r < reps; ++r) {
    ringdown::Diagnostics diagnostics;
    auto start = Clock::now();
    auto run = ringdown::solver::run_transient_sampled(*circuit, circuit->records, options, diagnostics);
    engine_best = std::min(engine_best, seconds_since(start));
    if (run.summary.status != ringdown::solver::Status::Ok) {
      print_errors(diagnostics);
      return 3;
    }
    if (r + 1 == reps) kept = std::move(run);
  }
  std::string name = file.substr(file.find_last_of('/') + 1);
  if (name.size() > 4 && name.compare(name.size() - 4, 4, ".rlc") == 0) name.resize(name.size() - 4);
  std::printf("case=%s parse_s=%.6e engine_s=%.6e samples=%zu states=%zu segments=%zu "
              "propagators=%zu sparse_propagators=%zu",
              name.c_str(), parse_best, engine_best, kept.time.size(), kept.summary.states,
              kept.summary.segments, kept.summary.propagators_built,
              kept.summary.sparse_propagators);

  if (marginal) {
    // Per-sample cost from the difference of an N-sample and a 2N-sample run: set-up
    // (reduction, expm) is the same in both and cancels.
    double checksum = 0;
    double t1 = std::numeric_limits<double>::infinity(), t2 = t1;
    std::size_t rows1 = 0, rows2 = 0;
    auto twice = options;
    twice.until = 2 * options.until;
    for (int r = 0; r < reps; ++r) {
      t1 = std::min(t1, streamed_run(*circuit, options, checksum, rows1));
      t2 = std::min(t2, streamed_run(*circuit, twice, checksum, rows2));
    }
    double per = rows2 > rows1 ? std::max(0.0, t2 - t1) / static_cast<double>(rows2 - rows1) : 0.0;
    std::printf(" marginal_s=%.6e checksum=%.3e", per, checksum);
  }
  std::printf("\n");

  if (!dump.empty()) {
    std::FILE* out = std::fopen(dump.c_str(), "wb");
    if (!out) {
      std::fprintf(stderr, "cannot write %s\n", dump.c_str());
      return 2;
    }
    std::vector<double> row(kept.values.size() + 1);
    for (std::size_t i = 0; i < kept.time.size(); ++i) {
      row[0] = kept.time[i];
      for (std::size_t k = 0; k < kept.values.size(); ++k) row[k + 1] = kept.values[k][i];
      std::fwrite(row.data(), sizeof(double), row.size(), out);
    }
    std::fclose(out);
  }
  return 0;
}

// Repeats y = Phi x; x = y until about `budget` seconds have passed; returns s per product.
// Phi is scaled to norm 0.5 so x neither overflows nor underflows.
template <typename Matrix, typename Vector>
double time_matvec(Matrix phi, Vector x, double budget) {
  phi *= 0.5 / phi.norm();
  Vector y = x;
  std::size_t count = 0, batch = 64;
  double checksum = 0;
  auto start = Clock::now();
  double elapsed = 0;
  while (elapsed < budget) {
    for (std::size_t k = 0; k < batch; ++k) {
      y.noalias() = phi * x;
      x = y;
      x(0) += 1.0;  // keep the product from decaying to zero (and from being optimised away)
    }
    count += batch;
    elapsed = seconds_since(start);
  }
  checksum += x.sum();
  if (checksum == 42.0) std::printf(" ");  // never true in practice; uses the result
  return elapsed / static_cast<double>(count);
}

template <int N>
double fixed_matvec(double budget) {
  using M = Eigen::Matrix<double, N, N>;
  using V = Eigen::Matrix<double, N, 1>;
  return time_matvec<M, V>(M::Random(), V::Random(), budget);
}

int run_matvec(int n, bool fixed) {
  constexpr double kBudget = 0.05;  // seconds per measurement
  constexpr int kMeasurements = 10;
  double s = std::numeric_limits<double>::infinity();
  for (int rep = 0; rep < kMeasurements; ++rep) {
    double one = 0;
    if (fixed) {
      switch (n) {
        case 2: one = fixed_matvec<2>(kBudget); break;
        case 3: one = fixed_matvec<3>(kBudget); break;
        case 4: one = fixed_matvec<4>(kBudget); break;
        case 5: one = fixed_matvec<5>(kBudget); break;
        case 6: one = fixed_matvec<6>(kBudget); break;
        case 7: one = fixed_matvec<7>(kBudget); break;
        case 8: one = fixed_matvec<8>(kBudget); break;
        default: std::fprintf(stderr, "fixed sizes: 2 to 8\n"); return 2;
      }
    } else {
      one = time_matvec<Eigen::MatrixXd, Eigen::VectorXd>(Eigen::MatrixXd::Random(n, n),
                                                          Eigen::VectorXd::Random(n), kBudget);
    }
    s = std::min(s, one);
  }
  std::printf("matvec=%d kind=%s seconds=%.6e\n", n, fixed ? "fixed" : "dynamic", s);
  return 0;
}

}  // namespace

int main(int argc, char** argv) {
  std::vector<std::string> args(argv + 1, argv + argc);
  auto usage = [] {
    std::fprintf(stderr,
                 "usage: engine_bench run FILE.rlc [--reps N] [--dump PATH] [--marginal]\n"
                 "       engine_bench matvec N [--fixed]\n");
    return 2;
  };
  if (args.size() < 2) return usage();
  if (args[0] == "matvec") {
    bool fixed = std::find(args.begin(), args.end(), "--fixed") != args.end();
    return run_matvec(std::atoi(args[1].c_str()), fixed);
  }
  if (args[0] != "run") return usage();
  int reps = 1;
  std::string dump;
  bool marginal = false;
  for (std::size_t i = 2; i < args.size(); ++i) {
    if (args[i] == "--reps" && i + 1 < args.size()) {
      reps = std::max(1, std::atoi(args[++i].c_str()));
    } else if (args[i] == "--dump" && i + 1 < args.size()) {
      dump = args[++i];
    } else if (args[i] == "--marginal") {
      marginal = true;
    } else {
      return usage();
    }
  }
  return run_case(args[1], reps, dump, marginal);
}
