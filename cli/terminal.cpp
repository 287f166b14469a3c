// See terminal.hpp.
#include "cli/terminal.hpp"

#include <sys/ioctl.h>
#include <unistd.h>

#include <cstdlib>
#include <string>

namespace ringdown::cli {

namespace {

int positive_env(const char* name) {
  const char* text = std::getenv(name);
  if (!text || !*text) return 0;
  char* end = nullptr;
  const long value = std::strtol(text, &end, 10);
  // A size beyond 10000 cells is a mistake, not a terminal (common practice).
  if (*end != '\0' || value <= 0 || value > 10000) return 0;
  return static_cast<int>(value);
}

}  // namespace

bool is_terminal(int fd) { return ::isatty(fd) == 1; }

TerminalSize terminal_size(int fd, TerminalSize fallback) {
  TerminalSize size;
  struct winsize ws {};
  if (is_terminal(fd) && ::ioctl(fd, TIOCGWINSZ, &ws) == 0) {
    size.columns = ws.ws_col;
    size.lines = ws.ws_row;
  }
  if (size.columns <= 0) size.columns = positive_env("COLUMNS");
  if (size.lines <= 0) size.lines = positive_env("LINES");
  if (size.columns <= 0) size.columns = fallback.columns;
  if (size.lines <= 0) size.lines = fallback.lines;
  return size;
}

}  // namespace ringdown::cli
