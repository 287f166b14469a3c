// SplitMix64 draws and the Wilson interval: see draws.hpp. The constants are those of
// Vigna's splitmix64.c (from memory; the published first outputs are checked in
// tests/solver/draws_test.cpp).
#include "solver/draws.hpp"

#include <algorithm>
#include <cmath>
#include <numbers>

namespace ringdown::solver {

namespace {
constexpr std::uint64_t kGolden = 0x9e3779b97f4a7c15ULL;  // 2^64 / golden ratio, odd
constexpr std::uint64_t kMix1 = 0xbf58476d1ce4e5b9ULL;
constexpr std::uint64_t kMix2 = 0x94d049bb133111ebULL;
constexpr double kTwoToMinus53 = 1.0 / 9007199254740992.0;  // 2^-53
}  // namespace

std::uint64_t SplitMix64::next() {
  std::uint64_t z = (state_ += kGolden);
  z = (z ^ (z >> 30)) * kMix1;
  z = (z ^ (z >> 27)) * kMix2;
  return z ^ (z >> 31);
}

double SplitMix64::uniform() { return static_cast<double>(next() >> 11) * kTwoToMinus53; }

double SplitMix64::normal() {
  const double u1 = uniform();
  const double u2 = uniform();
  return std::sqrt(-2.0 * std::log(1.0 - u1)) * std::cos(2.0 * std::numbers::pi * u2);
}

std::uint64_t splitmix64_once(std::uint64_t x) { return SplitMix64(x).next(); }

SplitMix64 trial_generator(std::uint64_t seed, std::uint64_t trial, std::uint64_t element) {
  return SplitMix64(splitmix64_once(splitmix64_once(splitmix64_once(seed) ^ trial) ^ element));
}

double draw_factor(DrawSpread spread, double tol, std::uint64_t seed, std::uint64_t trial,
                   std::uint64_t element, bool enumerate) {
  if (spread == DrawSpread::Corners) {
    bool plus = false;
    if (enumerate)
      plus = element < 64 && ((trial >> element) & 1U) != 0;
    else
      plus = (trial_generator(seed, trial, element).next() >> 63) != 0;
    return plus ? 1 + tol : 1 - tol;
  }
  SplitMix64 g = trial_generator(seed, trial, element);
  if (spread == DrawSpread::Uniform) return 1 + tol * (2 * g.uniform() - 1);
  return 1 + tol / 3 * g.normal();
}

std::pair<double, double> wilson_interval(long successes, long n, double z) {
  if (n <= 0) return {0.0, 1.0};
  const double nn = static_cast<double>(n);
  const double p = static_cast<double>(successes) / nn;
  const double z2 = z * z;
  const double denominator = 1 + z2 / nn;
  const double centre = (p + z2 / (2 * nn)) / denominator;
  const double half = z / denominator * std::sqrt(p * (1 - p) / nn + z2 / (4 * nn * nn));
  return {std::max(0.0, centre - half), std::min(1.0, centre + half)};
}

}  // namespace ringdown::solver
