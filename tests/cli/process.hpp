// Test helper: runs the built ringdown binary (RINGDOWN_BINARY) as a child
// process with posix_spawn, feeding nothing on stdin and capturing stdout,
// stderr and the exit status. Both pipes are drained together with poll(2)
// so a chatty child cannot deadlock on a full pipe.
#pragma once

#include <sys/types.h>

#include <map>
#include <string>
#include <vector>

namespace ringdown::test {

struct ProcessResult {
  int exit_code = -1;   // exit status, or -1 when ended by a signal
  int signal = 0;       // the signal that ended it, 0 if none
  std::string out;      // stdout
  std::string err;      // stderr
};

// Runs `args` (argv[1..]) with extra environment variables (added to, or
// replacing, the inherited ones).
ProcessResult run_ringdown(const std::vector<std::string>& args,
                           const std::map<std::string, std::string>& env = {});

// Starts ringdown without waiting (output discarded); returns its pid.
pid_t start_ringdown(const std::vector<std::string>& args);
// Waits for `pid`; fills exit_code/signal.
ProcessResult wait_for(pid_t pid);

}  // namespace ringdown::test
