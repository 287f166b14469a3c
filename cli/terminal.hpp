// Facts about the terminal the output goes to: its size (for the text plot
// and the progress bar) and whether a stream is a terminal at all.
#pragma once

namespace ringdown::cli {

struct TerminalSize {
  int columns = 0;
  int lines = 0;
};

// Size of the terminal on file descriptor `fd`: ioctl(TIOCGWINSZ) when fd is a
// terminal, else the COLUMNS / LINES environment variables (POSIX.1-2008,
// XBD chapter 8, "Other Environment Variables"), else `fallback` (each field
// separately).
TerminalSize terminal_size(int fd, TerminalSize fallback);

bool is_terminal(int fd);

}  // namespace ringdown::cli
