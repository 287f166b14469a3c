// See distribute.hpp. The messages, all point to point between rank 0 and one other rank
// (no collective, so a rank that stopped early cannot leave the others waiting in one):
//   header  4 x uint64 {kind, job count, payload bytes, exit code}, tag kTagHeader
//           kind kResults: the payload follows (tag kTagPayload, in chunks of <= 1 GiB):
//                          per job of the rank's share, its index (uint64) and its encoding
//           kind kFinished: the rank has finished its command (exit code) and now waits
//   final   the exit code (int), rank 0 to each rank, tag kTagFinal
#include "cli/distribute.hpp"

#include <algorithm>
#include <cstdint>
#include <cstdio>
#include <cstdlib>
#include <string>

#include "cli/console.hpp"

#if RINGDOWN_HAVE_MPI
#include <fcntl.h>
#include <mpi.h>
#include <unistd.h>
#endif

namespace ringdown::cli {

namespace {

int g_rank = 0;
int g_size = 1;

#if RINGDOWN_HAVE_MPI
bool g_active = false;
std::vector<bool> g_stopped;      // rank 0: ranks that sent kFinished already
std::vector<int> g_stopped_code;  // and their exit code

constexpr int kTagHeader = 1, kTagPayload = 2, kTagFinal = 3;
constexpr std::uint64_t kResults = 1, kFinished = 2;
constexpr std::size_t kChunk = std::size_t{1} << 30;  // MPI counts are int

// Started by an MPI launcher: Open MPI's mpirun sets OMPI_COMM_WORLD_SIZE, PMIx launchers
// PMIX_RANK, PMI-1/2 launchers PMI_RANK (Open MPI 4.1 and PMIx documentation).
bool launched_by_mpi() {
  return std::getenv("OMPI_COMM_WORLD_SIZE") || std::getenv("PMIX_RANK") || std::getenv("PMI_RANK");
}

void send_header(std::uint64_t kind, std::uint64_t jobs, std::uint64_t bytes, int code) {
  std::uint64_t h[4] = {kind, jobs, bytes, static_cast<std::uint64_t>(static_cast<std::int64_t>(code))};
  MPI_Send(h, 4, MPI_UINT64_T, 0, kTagHeader, MPI_COMM_WORLD);
}

void send_bytes(const std::vector<std::uint8_t>& bytes) {
  for (std::size_t at = 0; at < bytes.size(); at += kChunk) {
    const int n = static_cast<int>(std::min(kChunk, bytes.size() - at));
    MPI_Send(bytes.data() + at, n, MPI_BYTE, 0, kTagPayload, MPI_COMM_WORLD);
  }
}

std::vector<std::uint8_t> receive_bytes(int from, std::uint64_t size) {
  std::vector<std::uint8_t> bytes(size);
  for (std::size_t at = 0; at < bytes.size(); at += kChunk) {
    const int n = static_cast<int>(std::min(kChunk, bytes.size() - at));
    MPI_Recv(bytes.data() + at, n, MPI_BYTE, from, kTagPayload, MPI_COMM_WORLD, MPI_STATUS_IGNORE);
  }
  return bytes;
}

struct Header {
  std::uint64_t kind = 0, jobs = 0, bytes = 0;
  int code = 0;
};

Header receive_header(int from) {
  std::uint64_t h[4] = {0, 0, 0, 0};
  MPI_Recv(h, 4, MPI_UINT64_T, from, kTagHeader, MPI_COMM_WORLD, MPI_STATUS_IGNORE);
  return {h[0], h[1], h[2], static_cast<int>(static_cast<std::int64_t>(h[3]))};
}

// Job k goes to rank k mod N: neighbouring points (often alike in cost) spread evenly.
std::vector<std::size_t> share_of(int r, std::size_t count) {
  std::vector<std::size_t> jobs;
  for (std::size_t k = static_cast<std::size_t>(r); k < count; k += static_cast<std::size_t>(g_size)) jobs.push_back(k);
  return jobs;
}

#endif

}  // namespace

int rank() { return g_rank; }
int rank_count() { return g_size; }

DistributedSession::DistributedSession([[maybe_unused]] int& argc, [[maybe_unused]] char**& argv) {
#if RINGDOWN_HAVE_MPI
  if (!launched_by_mpi()) return;
  int provided = 0;
  // Only the main thread calls MPI (the --jobs workers never do).
  MPI_Init_thread(&argc, &argv, MPI_THREAD_FUNNELED, &provided);
  g_active = true;
  MPI_Comm_rank(MPI_COMM_WORLD, &g_rank);
  MPI_Comm_size(MPI_COMM_WORLD, &g_size);
  g_stopped.assign(static_cast<std::size_t>(g_size), false);
  g_stopped_code.assign(static_cast<std::size_t>(g_size), 0);
  if (g_rank != 0) {
    const int null = ::open("/dev/null", O_WRONLY);
    if (null >= 0) {
      std::fflush(stdout);
      std::fflush(stderr);
      ::dup2(null, 1);
      ::dup2(null, 2);
      ::close(null);
    }
  }
#endif
}

DistributedSession::~DistributedSession() {
#if RINGDOWN_HAVE_MPI
  if (g_active) {
    g_active = false;
    MPI_Finalize();
  }
#endif
}

int DistributedSession::finish(int exit_code) {
#if RINGDOWN_HAVE_MPI
  if (!g_active) return exit_code;
  std::fflush(stdout);
  std::fflush(stderr);
  if (g_rank != 0) {
    send_header(kFinished, 0, 0, exit_code);
    MPI_Recv(&exit_code, 1, MPI_INT, 0, kTagFinal, MPI_COMM_WORLD, MPI_STATUS_IGNORE);
  } else {
    for (int r = 1; r < g_size; ++r) {
      // A rank may still send the results of a sweep rank 0 did not run (it stopped before):
      // those are read and dropped.
      while (!g_stopped[static_cast<std::size_t>(r)]) {
        const Header h = receive_header(r);
        if (h.kind == kResults) receive_bytes(r, h.bytes);
        else g_stopped[static_cast<std::size_t>(r)] = true;
      }
    }
    for (int r = 1; r < g_size; ++r) MPI_Send(&exit_code, 1, MPI_INT, r, kTagFinal, MPI_COMM_WORLD);
  }
  g_active = false;
  MPI_Finalize();
#endif
  return exit_code;
}

bool run_distributed(std::vector<JobResult>& results, const JobsRunner& run_jobs) {
  const std::size_t count = results.size();
  if (g_size == 1) {
    std::vector<std::size_t> all(count);
    for (std::size_t k = 0; k < count; ++k) all[k] = k;
    run_jobs(all);
    return true;
  }
#if RINGDOWN_HAVE_MPI
  const std::vector<std::size_t> mine = share_of(g_rank, count);
  run_jobs(mine);
  if (g_rank != 0) {
    std::vector<std::uint8_t> bytes;
    for (std::size_t k : mine) {
      const auto index = static_cast<std::uint64_t>(k);
      const auto* p = reinterpret_cast<const std::uint8_t*>(&index);
      bytes.insert(bytes.end(), p, p + sizeof index);
      encode(results[k], bytes);
    }
    send_header(kResults, count, bytes.size(), 0);
    send_bytes(bytes);
    return false;
  }
  std::vector<std::size_t> missing;
  std::string why;
  for (int r = 1; r < g_size; ++r) {
    const std::vector<std::size_t> share = share_of(r, count);
    bool received = false;
    if (!g_stopped[static_cast<std::size_t>(r)]) {
      const Header h = receive_header(r);
      if (h.kind == kFinished) {
        g_stopped[static_cast<std::size_t>(r)] = true;
        g_stopped_code[static_cast<std::size_t>(r)] = h.code;
      } else {
        const std::vector<std::uint8_t> bytes = receive_bytes(r, h.bytes);
        std::size_t pos = 0;
        received = h.jobs == count;
        for (std::size_t i = 0; received && i < share.size(); ++i) {
          std::uint64_t index = 0;
          received = bytes.size() - pos >= sizeof index;
          if (!received) break;
          std::copy_n(bytes.data() + pos, sizeof index, reinterpret_cast<std::uint8_t*>(&index));
          pos += sizeof index;
          received = index == share[i] && decode(bytes, pos, results[share[i]]);
        }
        received = received && pos == bytes.size();
        if (!received) why = "its sweep has " + std::to_string(h.jobs) + " runs, not " + std::to_string(count) + " (a different file?)";
      }
    }
    if (!received) {
      if (why.empty())
        why = "it stopped before the runs with exit code " + std::to_string(g_stopped_code[static_cast<std::size_t>(r)]) +
              " (can every machine read the file, and does it have gnuplot if --plot is given?)";
      print_warning("rank " + std::to_string(r) + " sent no results: " + why + "; rank 0 runs its " +
                    std::to_string(share.size()) + " runs");
      missing.insert(missing.end(), share.begin(), share.end());
      why.clear();
    }
  }
  if (!missing.empty()) run_jobs(missing);
  return true;
#else
  return true;
#endif
}

}  // namespace ringdown::cli
