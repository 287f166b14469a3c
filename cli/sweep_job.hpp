// The result of one (point, trial) job of the sweep runner (cli/sweep.cpp), and its byte
// encoding, so that ranks of a distributed run (cli/distribute.hpp) can send their results
// to rank 0. A field added to JobResult must be added to encode/decode in sweep_job.cpp too
// (tests/cli/sweep_job_test.cpp round-trips every field; tests/mpi/check_mpi.sh compares a
// 2-rank run's outputs with a serial run's).
//
// Not here: running a job (sweep.cpp), sending bytes (distribute.cpp).
#pragma once

#include <cstdint>
#include <optional>
#include <string>
#include <vector>

#include "cli/evaluation.hpp"
#include "parser/diagnostic.hpp"
#include "solver/figures.hpp"

namespace ringdown::cli {

struct JobResult {
  int exit_code = 0;
  Diagnostics diagnostics;     // warnings, or the errors that stopped it
  std::vector<double> drawn;   // per toleranced part
  std::vector<solver::FigureValue> reports;
  std::vector<solver::FigureValue> expect_values;
  std::vector<bool> expect_pass;
  bool pass = true;
  std::optional<SafetyReport> hazard;         // the mains screen (on the samples), when it fires
  std::vector<double> times;                  // kept with --csv-signals / --plot
  std::vector<std::vector<double>> samples;   // samples[record][k]
};

// Appends `r` to `bytes` (doubles bit for bit, so a decoded result prints exactly alike).
void encode(const JobResult& r, std::vector<std::uint8_t>& bytes);
// Reads one result at `pos` (advanced past it); false when the bytes end early or are malformed.
bool decode(const std::vector<std::uint8_t>& bytes, std::size_t& pos, JobResult& r);

}  // namespace ringdown::cli
