// Sweeps and trials across machines (docs/cluster.md): with the RINGDOWN_MPI build option and
// a launch by mpirun, every rank runs the same command; the sweep runner's jobs are dealt to
// the ranks (job k to rank k mod N), each rank runs its share on --jobs threads, and rank 0
// gathers every result (cli/sweep_job.hpp) and writes every output. Ranks other than 0 print
// nothing and write no file; every rank exits with rank 0's exit code.
//
// Robustness: a rank that stops before a sweep's jobs (a file it cannot read, no gnuplot on
// its machine) is not waited for: rank 0 runs its share itself and says so.
//
// In a build without MPI, or a binary started without mpirun, there is one rank and every
// function here is the serial behaviour (run_distributed runs every job in this process).
//
// Not here: what a job does (cli/sweep.cpp), the encoding of its result (sweep_job.cpp).
#pragma once

#include <cstddef>
#include <functional>
#include <string>
#include <vector>

#include "cli/sweep_job.hpp"

namespace ringdown::cli {

// Joins the ranks when the process was started by an MPI launcher (and the build has MPI);
// ranks other than 0 get /dev/null as stdout and stderr. finish() must be the last call.
class DistributedSession {
 public:
  DistributedSession(int& argc, char**& argv);
  ~DistributedSession();
  DistributedSession(const DistributedSession&) = delete;
  DistributedSession& operator=(const DistributedSession&) = delete;
  // Every rank returns rank 0's `exit_code`; the ranks leave MPI.
  int finish(int exit_code);
};

int rank();        // 0 when not distributed
int rank_count();  // 1 when not distributed
inline bool is_root() { return rank() == 0; }

// The jobs [0, results.size()) over the ranks: run_jobs(indices) must fill results[i] for each
// index it is given. Rank 0: returns true with every result filled. Other ranks: run their
// share, send it to rank 0 and return false (the caller then does nothing more with this
// sweep).
using JobsRunner = std::function<void(const std::vector<std::size_t>& jobs)>;
bool run_distributed(std::vector<JobResult>& results, const JobsRunner& run_jobs);

}  // namespace ringdown::cli
