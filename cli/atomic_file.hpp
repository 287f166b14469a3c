// Output files that are never left half-written (ARCHITECTURE.md, "Outputs").
//
// An AtomicFile writes to a temporary name in the target's own directory
// ("<dir>/.<name>.XXXXXX", so the final rename(2) stays on one file system and
// is atomic, POSIX.1-2008 rename()) and renames it over the target only on
// commit(). If the object is destroyed without commit (an error, an
// exception) the temporary is removed. install_cleanup_handlers() adds the
// signal side: on SIGINT, SIGTERM, SIGHUP or SIGPIPE every registered
// temporary is unlinked and the signal is re-raised with its default action,
// so the exit status still says which signal ended the run.
//
// Not handled: SIGKILL and power loss (nothing can catch them; the temporary
// is then a dot-file beside the target, never the target itself).
#pragma once

#include <cstdio>
#include <string>
#include <sys/types.h>

namespace ringdown::cli {

// Installs the SIGINT/SIGTERM/SIGHUP/SIGPIPE handlers (idempotent).
void install_cleanup_handlers();

class AtomicFile {
 public:
  // Opens a temporary beside `path` for writing. `mode`: permissions of the
  // final file; a negative value means 0666 minus the process umask, the mode
  // a plain open(2) would give.
  explicit AtomicFile(std::string path, int mode = -1);
  ~AtomicFile();
  AtomicFile(const AtomicFile&) = delete;
  AtomicFile& operator=(const AtomicFile&) = delete;

  bool ok() const { return error_.empty(); }
  const std::string& error() const { return error_; }  // "cannot create ...: reason"
  const std::string& path() const { return path_; }
  const std::string& temp_path() const { return temp_path_; }

  // The open stream on the temporary (nullptr after release_stream()).
  std::FILE* stream() { return stream_; }
  // Closes the stream so another process (gnuplot) can write the temporary
  // by name; commit() then only renames. Returns false on a write error.
  bool release_stream();

  // Flushes, syncs and renames the temporary over the target. On failure
  // the temporary is removed and error() says why.
  bool commit();
  // Removes the temporary now (also done by the destructor when not committed).
  void discard();

 private:
  std::string path_;
  std::string temp_path_;
  std::FILE* stream_ = nullptr;
  int slot_ = -1;          // index in the signal handler's registry, -1 if none
  mode_t mode_ = 0644;
  bool done_ = false;      // committed or discarded
  std::string error_;
};

}  // namespace ringdown::cli
