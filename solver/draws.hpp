// Reproducible random draws for `trials` (NETLIST.md section 7, "Sweeps and trials") and the
// statistics of their summary.
//
// Every number comes from SplitMix64 (S. Vigna, splitmix64.c, public domain, 2015; the
// generator of Steele, Lea and Flood, "Fast splittable pseudorandom number generators",
// OOPSLA 2014), so trial k's draws are a pure function of (seed, k, element index): the
// same on every machine, compiler, thread count and rank count. No standard-library
// distribution is used (their output differs between implementations). The combination
// of (seed, trial, element) into one generator state is documented in docs/language.md.
//
// Not here: which elements are toleranced, or how a draw scales a value (cli/sweep.cpp);
// any other distribution.
#pragma once

#include <cstdint>
#include <utility>

namespace ringdown::solver {

// SplitMix64: a 64-bit state advanced by the golden-ratio increment, each output the
// state passed through Stafford's "Mix13" finaliser (Vigna's splitmix64.c).
class SplitMix64 {
 public:
  explicit SplitMix64(std::uint64_t state) : state_(state) {}
  std::uint64_t next();
  // Uniform in [0, 1): the top 53 bits of one output times 2^-53.
  double uniform();
  // Standard normal by the Box-Muller transform (Box and Muller, Ann. Math. Statist. 29,
  // 1958): two outputs u1, u2; z = sqrt(-2 ln(1 - u1)) cos(2 pi u2) (1 - u1 is in (0, 1],
  // so the logarithm is finite). The sine branch is not kept, so each call uses exactly
  // two outputs and a draw never depends on an earlier call.
  double normal();

 private:
  std::uint64_t state_;
};

// The first output of SplitMix64 started from `x`.
std::uint64_t splitmix64_once(std::uint64_t x);

// The generator for trial `trial`, toleranced element `element` (docs/language.md):
//   state = once(once(once(seed) ^ trial) ^ element)
SplitMix64 trial_generator(std::uint64_t seed, std::uint64_t trial, std::uint64_t element);

enum class DrawSpread { Uniform, Normal, Corners };

// The factor an element's nominal value is multiplied by in trial `trial`:
//   uniform: 1 + tol (2u - 1), u uniform in [0, 1)
//   normal:  1 + (tol / 3) z, z standard normal (tol is 3 sigma); not truncated
//   corners: 1 + tol or 1 - tol; `enumerate` (every combination fits in the run count):
//            bit `element` of `trial` set means +tol (trial 0 is every element at -tol);
//            otherwise the sign is the top bit of the generator's first output (1: +tol).
double draw_factor(DrawSpread spread, double tol, std::uint64_t seed, std::uint64_t trial,
                   std::uint64_t element, bool enumerate);

// Wilson score interval for a binomial proportion (E. B. Wilson, "Probable inference, the
// law of succession, and statistical inference", JASA 22(158), 1927; from memory):
// `successes` of `n` at two-sided confidence given by the normal quantile `z`
// (1.959963984540054 for 95 %). Returns (low, high); (0, 1) when n = 0.
std::pair<double, double> wilson_interval(long successes, long n, double z = 1.959963984540054);

}  // namespace ringdown::solver
