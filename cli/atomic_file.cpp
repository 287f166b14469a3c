// Temporary-then-rename output files and their signal cleanup; see
// atomic_file.hpp. The signal handler only calls async-signal-safe functions
// (unlink, sigaction, raise: POSIX.1-2008, section 2.4.3), and reads a fixed
// registry of paths that is written before its "used" flag is set.
#include "cli/atomic_file.hpp"

#include <fcntl.h>
#include <sys/stat.h>
#include <unistd.h>

#include <cerrno>
#include <csignal>
#include <cstring>
#include <vector>

namespace ringdown::cli {

namespace {

// A run writes at most a CSV, a plot and (fmt) one file at a time; 64 slots
// leave room. A file beyond that is still atomic, only not cleaned on a signal.
constexpr int kRegistrySlots = 64;
// PATH_MAX on Linux (limits.h); longer paths are not registered.
constexpr std::size_t kRegistryPathBytes = 4096;

char g_paths[kRegistrySlots][kRegistryPathBytes];
volatile std::sig_atomic_t g_used[kRegistrySlots];
mode_t g_umask = 022;
bool g_installed = false;

constexpr int kCleanupSignals[] = {SIGINT, SIGTERM, SIGHUP, SIGPIPE};

extern "C" void cleanup_and_reraise(int signal_number) {
  for (int i = 0; i < kRegistrySlots; ++i) {
    if (g_used[i]) ::unlink(g_paths[i]);
  }
  struct sigaction action {};
  action.sa_handler = SIG_DFL;
  sigemptyset(&action.sa_mask);
  ::sigaction(signal_number, &action, nullptr);
  ::raise(signal_number);
}

int register_path(const std::string& path) {
  if (path.size() + 1 > kRegistryPathBytes) return -1;
  for (int i = 0; i < kRegistrySlots; ++i) {
    if (!g_used[i]) {
      std::memcpy(g_paths[i], path.c_str(), path.size() + 1);
      g_used[i] = 1;
      return i;
    }
  }
  return -1;
}

void unregister_path(int slot) {
  if (slot >= 0) g_used[slot] = 0;
}

std::string errno_text() { return std::strerror(errno); }

}  // namespace

void install_cleanup_handlers() {
  if (g_installed) return;
  g_installed = true;
  // umask can only be read by setting it; done once, before any thread exists.
  g_umask = ::umask(0);
  ::umask(g_umask);
  for (int signal_number : kCleanupSignals) {
    struct sigaction old {};
    ::sigaction(signal_number, nullptr, &old);
    // A signal ignored by the parent (nohup, a shell's background job) stays ignored.
    if (old.sa_handler == SIG_IGN) continue;
    struct sigaction action {};
    action.sa_handler = cleanup_and_reraise;
    sigemptyset(&action.sa_mask);
    for (int other : kCleanupSignals) sigaddset(&action.sa_mask, other);
    ::sigaction(signal_number, &action, nullptr);
  }
}

AtomicFile::AtomicFile(std::string path, int mode) : path_(std::move(path)) {
  if (!g_installed) {
    g_umask = ::umask(0);
    ::umask(g_umask);
  }
  mode_ = mode >= 0 ? static_cast<mode_t>(mode) : static_cast<mode_t>(0666 & ~g_umask);
  const auto slash = path_.rfind('/');
  const std::string dir = slash == std::string::npos ? std::string() : path_.substr(0, slash + 1);
  const std::string name = slash == std::string::npos ? path_ : path_.substr(slash + 1);
  if (name.empty()) {
    error_ = "cannot write '" + path_ + "': it names a directory";
    done_ = true;
    return;
  }
  std::string pattern = dir + "." + name + ".XXXXXX";
  std::vector<char> buffer(pattern.begin(), pattern.end());
  buffer.push_back('\0');
  // Block the cleanup signals between creating the file and registering it,
  // so a signal cannot arrive while the temporary is unknown to the handler.
  sigset_t block, previous;
  sigemptyset(&block);
  for (int s : kCleanupSignals) sigaddset(&block, s);
  ::sigprocmask(SIG_BLOCK, &block, &previous);
  const int fd = ::mkstemp(buffer.data());
  if (fd >= 0) {
    temp_path_ = buffer.data();
    slot_ = register_path(temp_path_);
  }
  ::sigprocmask(SIG_SETMASK, &previous, nullptr);
  if (fd < 0) {
    error_ = "cannot create a file in '" + (dir.empty() ? std::string(".") : dir) +
             "' for '" + path_ + "': " + errno_text();
    done_ = true;
    return;
  }
  stream_ = ::fdopen(fd, "w");
  if (!stream_) {
    error_ = "cannot open '" + temp_path_ + "': " + errno_text();
    ::close(fd);
    discard();
  }
}

AtomicFile::~AtomicFile() {
  if (!done_) discard();
}

bool AtomicFile::release_stream() {
  if (!stream_) return error_.empty();
  bool good = std::fflush(stream_) == 0 && !std::ferror(stream_);
  if (!good && error_.empty()) error_ = "cannot write '" + path_ + "': " + errno_text();
  if (std::fclose(stream_) != 0 && good) {
    good = false;
    error_ = "cannot write '" + path_ + "': " + errno_text();
  }
  stream_ = nullptr;
  return good;
}

bool AtomicFile::commit() {
  if (done_) return false;
  if (stream_) {
    if (std::fflush(stream_) != 0 || std::ferror(stream_)) {
      error_ = "cannot write '" + path_ + "': " + errno_text();
      discard();
      return false;
    }
    // The data must be on disk before the name points at it, or a crash
    // right after the rename could expose an empty file (common practice).
    ::fsync(::fileno(stream_));
    ::fchmod(::fileno(stream_), mode_);
    if (!release_stream()) {
      discard();
      return false;
    }
  } else {
    ::chmod(temp_path_.c_str(), mode_);
  }
  if (!error_.empty()) {
    discard();
    return false;
  }
  if (::rename(temp_path_.c_str(), path_.c_str()) != 0) {
    error_ = "cannot write '" + path_ + "': " + errno_text();
    discard();
    return false;
  }
  unregister_path(slot_);
  slot_ = -1;
  done_ = true;
  return true;
}

void AtomicFile::discard() {
  if (stream_) {
    std::fclose(stream_);
    stream_ = nullptr;
  }
  if (!temp_path_.empty()) ::unlink(temp_path_.c_str());
  unregister_path(slot_);
  slot_ = -1;
  done_ = true;
}

}  // namespace ringdown::cli
