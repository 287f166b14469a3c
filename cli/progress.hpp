// The progress bar of a long run (ARCHITECTURE.md, "Outputs"): on stderr, only
// when stderr is a terminal and the run has taken longer than a second (a
// quick run should not flicker), redrawn at most ten times a second:
//   [##########..........]  50%  1.2 M samples/s  3 s left
// and erased when the run ends. Disabled entirely by --quiet/--no-progress.
#pragma once

#include <chrono>
#include <cstddef>

namespace ringdown::cli {

class ProgressBar {
 public:
  // `samples`: rows the run will deliver (for the rate); `enabled`: false
  // makes every call a no-op.
  ProgressBar(bool enabled, std::size_t samples);
  ~ProgressBar();
  ProgressBar(const ProgressBar&) = delete;
  ProgressBar& operator=(const ProgressBar&) = delete;

  void update(double fraction);  // 0..1
  void finish();                 // erases the bar if it was drawn

  // True when stderr is a terminal (the condition for enabling the bar).
  static bool stderr_is_terminal();

 private:
  using Clock = std::chrono::steady_clock;
  bool enabled_;
  bool drawn_ = false;
  std::size_t samples_;
  Clock::time_point start_;
  Clock::time_point last_draw_;
  int width_ = 0;  // characters of the drawn line, to erase it
};

}  // namespace ringdown::cli
