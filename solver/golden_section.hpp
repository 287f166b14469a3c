// Golden-section search for the maximum of a unimodal function on a bracket
// (Kiefer 1953, "Sequential minimax search for a maximum"). Used where a
// figure's extremum is refined on an exact response (figures, frequency).
// Not here: bracketing; the caller gives a bracket that holds one maximum.
#pragma once

#include <cmath>
#include <functional>

namespace ringdown::solver {

struct GoldenSectionResult {
  double lo = 0, hi = 0;  // the final bracket
  double best = 0;        // the larger of the two interior values last evaluated
};

inline GoldenSectionResult golden_section_max(const std::function<double(double)>& g, double lo,
                                              double hi, double tol, int max_steps) {
  const double r = (std::sqrt(5.0) - 1.0) / 2.0;  // 1 / golden ratio
  double x1 = hi - r * (hi - lo), x2 = lo + r * (hi - lo);
  double g1 = g(x1), g2 = g(x2);
  for (int step = 0; step < max_steps && hi - lo > tol; ++step) {
    if (g1 >= g2) {
      hi = x2;
      x2 = x1;
      g2 = g1;
      x1 = hi - r * (hi - lo);
      g1 = g(x1);
    } else {
      lo = x1;
      x1 = x2;
      g1 = g2;
      x2 = lo + r * (hi - lo);
      g2 = g(x2);
    }
  }
  return {lo, hi, g1 >= g2 ? g1 : g2};
}

}  // namespace ringdown::solver
