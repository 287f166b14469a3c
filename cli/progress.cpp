// See progress.hpp.
#include "cli/progress.hpp"

#include <unistd.h>

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <string>

#include "cli/terminal.hpp"

namespace ringdown::cli {

namespace {

// Show the bar only for runs longer than this (issue 3: "> ~1 s").
constexpr double kShowAfterSeconds = 1.0;
// Redraw at most every 0.1 s: smooth to the eye, negligible cost.
constexpr double kRedrawSeconds = 0.1;
// Cells of the bar itself, and the narrowest terminal it is drawn on.
constexpr int kBarCells = 30;
constexpr int kMinColumns = 40;

std::string rate_text(double per_second) {
  // SI prefixes for the rate (SI Brochure 2019, table 7).
  const char* prefix = "";
  double scaled = per_second;
  if (per_second >= 1e9) scaled = per_second / 1e9, prefix = "G ";
  else if (per_second >= 1e6) scaled = per_second / 1e6, prefix = "M ";
  else if (per_second >= 1e3) scaled = per_second / 1e3, prefix = "k ";
  char out[64];
  std::snprintf(out, sizeof out, "%.3g %ssamples/s", scaled, prefix);
  return out;
}

std::string time_text(double seconds) {
  char out[32];
  if (seconds < 60) std::snprintf(out, sizeof out, "%.0f s", std::ceil(seconds));
  else if (seconds < 3600) std::snprintf(out, sizeof out, "%.0f min %02.0f s",
                                         std::floor(seconds / 60), std::fmod(seconds, 60));
  else std::snprintf(out, sizeof out, "%.1f h", seconds / 3600);
  return out;
}

}  // namespace

bool ProgressBar::stderr_is_terminal() { return is_terminal(STDERR_FILENO); }

ProgressBar::ProgressBar(bool enabled, std::size_t samples)
    : enabled_(enabled), samples_(samples), start_(Clock::now()), last_draw_(start_) {}

ProgressBar::~ProgressBar() { finish(); }

void ProgressBar::update(double fraction) {
  if (!enabled_) return;
  const auto now = Clock::now();
  const double elapsed = std::chrono::duration<double>(now - start_).count();
  if (elapsed < kShowAfterSeconds) return;
  if (drawn_ && std::chrono::duration<double>(now - last_draw_).count() < kRedrawSeconds) return;
  last_draw_ = now;
  fraction = std::clamp(fraction, 0.0, 1.0);

  const int columns = terminal_size(STDERR_FILENO, {80, 24}).columns;
  if (columns < kMinColumns) return;
  const int filled = static_cast<int>(std::lround(fraction * kBarCells));
  std::string line = "[" + std::string(static_cast<std::size_t>(filled), '#') +
                     std::string(static_cast<std::size_t>(kBarCells - filled), '.') + "]";
  char percent[16];
  std::snprintf(percent, sizeof percent, " %3.0f%%", fraction * 100);
  line += percent;
  if (fraction > 0) {
    line += "  " + rate_text(fraction * static_cast<double>(samples_) / elapsed);
    line += "  " + time_text(elapsed * (1 - fraction) / fraction) + " left";
  }
  if (static_cast<int>(line.size()) > columns - 1) line.resize(static_cast<std::size_t>(columns - 1));
  const int pad = std::max(0, width_ - static_cast<int>(line.size()));
  std::fprintf(stderr, "\r%s%*s", line.c_str(), pad, "");
  std::fflush(stderr);
  width_ = static_cast<int>(line.size());
  drawn_ = true;
}

void ProgressBar::finish() {
  if (!drawn_) return;
  std::fprintf(stderr, "\r%*s\r", width_, "");
  std::fflush(stderr);
  drawn_ = false;
  width_ = 0;
}

}  // namespace ringdown::cli
