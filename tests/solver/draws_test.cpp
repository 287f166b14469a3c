// The draws of `trials` (solver/draws.hpp): SplitMix64 against its published outputs, the
// uniform and normal draws' moments against their closed forms, reproducibility and the
// Wilson interval against hand-computed values.
#include "solver/draws.hpp"

#include <gtest/gtest.h>

#include <cmath>
#include <cstdint>
#include <set>
#include <vector>

namespace {

using ringdown::solver::DrawSpread;
using ringdown::solver::SplitMix64;

TEST(SplitMix64, MatchesTheReferenceOutputs) {
  // S. Vigna, splitmix64.c (2015), started from state 0: the first four outputs
  // (from memory; the same values come out of a direct Python transcription of
  // splitmix64.c).
  SplitMix64 g(0);
  EXPECT_EQ(g.next(), 0xe220a8397b1dcdafULL);
  EXPECT_EQ(g.next(), 0x6e789e6aa1b965f4ULL);
  EXPECT_EQ(g.next(), 0x06c45d188009454fULL);
  EXPECT_EQ(g.next(), 0xf88bb8a8724c81ecULL);
  // The widely quoted test vector for seed 1234567 (from memory).
  SplitMix64 h(1234567);
  EXPECT_EQ(h.next(), 6457827717110365317ULL);
  EXPECT_EQ(h.next(), 3203168211198807973ULL);
  EXPECT_EQ(h.next(), 9817491932198370423ULL);
}

TEST(SplitMix64, UniformHasTheMomentsOfU01) {
  // U(0,1): mean 1/2, variance 1/12 (closed form). Over n = 1e5 draws the sample mean has
  // standard error sqrt(1/12/n) = 9.1e-4; 5 standard errors: 4.6e-3. The variance's
  // standard error is sqrt((1/80 - 1/144)/n) = 2.4e-4 (fourth central moment 1/80); 5 of
  // them: 1.2e-3 (common practice, no source).
  SplitMix64 g(42);
  const int n = 100000;
  double sum = 0, sum2 = 0, lo = 1, hi = 0;
  for (int i = 0; i < n; ++i) {
    const double u = g.uniform();
    ASSERT_GE(u, 0.0);
    ASSERT_LT(u, 1.0);
    lo = std::min(lo, u);
    hi = std::max(hi, u);
    sum += u;
    sum2 += u * u;
  }
  const double mean = sum / n;
  const double var = sum2 / n - mean * mean;
  EXPECT_NEAR(mean, 0.5, 4.6e-3);
  EXPECT_NEAR(var, 1.0 / 12, 1.2e-3);
  EXPECT_LT(lo, 1e-3);
  EXPECT_GT(hi, 1 - 1e-3);
}

TEST(SplitMix64, NormalHasUnitVarianceAndNormalTails) {
  // N(0,1): mean 0 (standard error 1/sqrt(n) = 3.2e-3, 5 of them 1.6e-2), variance 1
  // (standard error sqrt(2/n) = 4.5e-3, 5 of them 2.2e-2), P(|z| > 3) = 0.0027 (normal
  // table; Abramowitz and Stegun 26.2, from memory): 270 expected in 1e5, Poisson
  // standard deviation 16.4, 5 of them: 82.
  SplitMix64 g(7);
  const int n = 100000;
  double sum = 0, sum2 = 0;
  int beyond3 = 0;
  for (int i = 0; i < n; ++i) {
    const double z = g.normal();
    sum += z;
    sum2 += z * z;
    beyond3 += std::abs(z) > 3;
  }
  const double mean = sum / n;
  EXPECT_NEAR(mean, 0.0, 1.6e-2);
  EXPECT_NEAR(sum2 / n - mean * mean, 1.0, 2.2e-2);
  EXPECT_NEAR(beyond3, 270, 82);
}

TEST(Draws, NormalSpreadTakesTolAsThreeSigma) {
  // NETLIST.md section 7: spread=normal takes tol as 3 sigma. With tol = 9 % the factor's
  // standard deviation is 3 %; over 1e5 trials its standard error is 0.03 sqrt(1/(2n)) =
  // 6.7e-5; 5 of them: 3.4e-4 (common practice, no source).
  const double tol = 0.09;
  const int n = 100000;
  double sum = 0, sum2 = 0;
  for (int k = 0; k < n; ++k) {
    const double f = ringdown::solver::draw_factor(DrawSpread::Normal, tol, 1, k, 0, false);
    sum += f;
    sum2 += f * f;
  }
  const double mean = sum / n;
  EXPECT_NEAR(mean, 1.0, 5 * 0.03 / std::sqrt(n));
  EXPECT_NEAR(std::sqrt(sum2 / n - mean * mean), tol / 3, 3.4e-4);
}

TEST(Draws, UniformSpreadStaysWithinTolAndFillsIt) {
  // spread=uniform: 1 + tol (2u - 1) lies in [1 - tol, 1 + tol); variance tol^2 / 3
  // (U(-1,1) has variance 1/3; closed form). 5 standard errors as above.
  const double tol = 0.05;
  const int n = 100000;
  double sum = 0, sum2 = 0;
  for (int k = 0; k < n; ++k) {
    const double f = ringdown::solver::draw_factor(DrawSpread::Uniform, tol, 3, k, 2, false);
    ASSERT_GE(f, 1 - tol);
    ASSERT_LT(f, 1 + tol);
    sum += f;
    sum2 += f * f;
  }
  const double mean = sum / n;
  EXPECT_NEAR(mean, 1.0, 5 * tol / std::sqrt(3.0 * n));
  EXPECT_NEAR(sum2 / n - mean * mean, tol * tol / 3, 5 * tol * tol * std::sqrt(4.0 / 45 / n));
}

TEST(Draws, AreAPureFunctionOfSeedTrialAndElement) {
  // Reproducibility (NETLIST.md section 7): the same (seed, trial, element) gives the same
  // factor whatever was drawn before; another seed, trial or element another factor.
  const double a = ringdown::solver::draw_factor(DrawSpread::Uniform, 0.1, 5, 17, 3, false);
  for (int k = 0; k < 100; ++k) ringdown::solver::draw_factor(DrawSpread::Uniform, 0.1, 9, k, 1, false);
  EXPECT_EQ(a, ringdown::solver::draw_factor(DrawSpread::Uniform, 0.1, 5, 17, 3, false));
  EXPECT_NE(a, ringdown::solver::draw_factor(DrawSpread::Uniform, 0.1, 6, 17, 3, false));
  EXPECT_NE(a, ringdown::solver::draw_factor(DrawSpread::Uniform, 0.1, 5, 18, 3, false));
  EXPECT_NE(a, ringdown::solver::draw_factor(DrawSpread::Uniform, 0.1, 5, 17, 4, false));
  // The documented combination: state = once(once(once(seed) ^ trial) ^ element).
  using ringdown::solver::splitmix64_once;
  SplitMix64 g(splitmix64_once(splitmix64_once(splitmix64_once(5) ^ 17) ^ 3));
  EXPECT_EQ(a, 1 + 0.1 * (2 * g.uniform() - 1));
}

TEST(Draws, CornersEnumerateEveryCombination) {
  // Three toleranced elements: trials 0..7 are the 2^3 sign patterns, each once, trial 0
  // all at -tol, bit e of k giving element e's sign.
  std::set<std::vector<int>> seen;
  for (std::uint64_t k = 0; k < 8; ++k) {
    std::vector<int> signs;
    for (std::uint64_t e = 0; e < 3; ++e) {
      const double f = ringdown::solver::draw_factor(DrawSpread::Corners, 0.1, 1, k, e, true);
      ASSERT_TRUE(f == 1.1 || f == 0.9) << f;
      signs.push_back(f > 1);
      EXPECT_EQ(f > 1, ((k >> e) & 1U) != 0);
    }
    seen.insert(signs);
  }
  EXPECT_EQ(seen.size(), 8U);
  // At random (more corners than runs): only the extremes, both of them.
  int plus = 0;
  for (std::uint64_t k = 0; k < 1000; ++k) {
    const double f = ringdown::solver::draw_factor(DrawSpread::Corners, 0.2, 4, k, 9, false);
    ASSERT_TRUE(f == 1.2 || f == 0.8) << f;
    plus += f > 1;
  }
  // Binomial(1000, 1/2): standard deviation 15.8; 5 of them: 79 (common practice, no source).
  EXPECT_NEAR(plus, 500, 79);
}

TEST(Wilson, MatchesHandComputedIntervals) {
  // Wilson (1927), JASA 22(158): centre (p + z^2/2n)/(1 + z^2/n), half-width
  // z/(1 + z^2/n) sqrt(p(1-p)/n + z^2/4n^2) (from memory). 95 of 100 at z = 1.96:
  // (0.88825, 0.97846) by hand.
  auto [lo, hi] = ringdown::solver::wilson_interval(95, 100);
  EXPECT_NEAR(lo, 0.88825, 1e-5);
  EXPECT_NEAR(hi, 0.97846, 1e-5);
  // 0 of n: the upper end is z^2 / (n + z^2) in closed form; 10 of 10 mirrors it.
  const double z2 = 1.959963984540054 * 1.959963984540054;
  auto [lo0, hi0] = ringdown::solver::wilson_interval(0, 10);
  EXPECT_DOUBLE_EQ(lo0, 0.0);
  EXPECT_NEAR(hi0, z2 / (10 + z2), 1e-15);
  auto [lo10, hi10] = ringdown::solver::wilson_interval(10, 10);
  EXPECT_NEAR(lo10, 10 / (10 + z2), 1e-15);
  EXPECT_NEAR(hi10, 1.0, 1e-15);
}

}  // namespace
