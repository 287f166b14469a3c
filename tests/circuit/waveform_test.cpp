// Waveforms of NETLIST.md section 5: values at chosen instants against the
// closed forms written in that section (the reference for every check below
// is "NETLIST.md section 5 definition" unless a comment says otherwise),
// corners, the agreement of the exact pieces with value() (a property test
// on random instants), and crossings.
#include <gtest/gtest.h>

#include <chrono>
#include <cmath>
#include <numbers>
#include <random>
#include <stdexcept>

#include "parser/waveform.hpp"

namespace ringdown {
namespace {

constexpr double kPi = std::numbers::pi;

// Relative-to-scale closeness for values computed two ways (rounding only).
void expect_close(double actual, double expected, double scale = 1.0, double rel = 1e-13) {
  EXPECT_NEAR(actual, expected, rel * std::max(scale, std::fabs(expected)));
}

void expect_corners(const std::vector<double>& actual, const std::vector<double>& expected) {
  ASSERT_EQ(actual.size(), expected.size());
  for (std::size_t k = 0; k < actual.size(); ++k) {
    EXPECT_NEAR(actual[k], expected[k], 1e-15 * std::max(1e-6, std::fabs(expected[k])))
        << "corner " << k;
  }
}

TEST(Waveform, Constant) {
  const auto w = make_constant(12);
  EXPECT_EQ(w->value(-1), 12);
  EXPECT_EQ(w->value(0), 12);
  EXPECT_EQ(w->value(3), 12);
  EXPECT_TRUE(w->corners(1).empty());
  const auto p = w->piece(0.5);
  EXPECT_EQ(p.begin, 0.5);
  EXPECT_TRUE(std::isinf(p.end));
  EXPECT_EQ(evaluate(p, 7), 12);
  EXPECT_EQ(w->describe(), "12");
}

TEST(Waveform, StepRamp) {
  // step(from=1, to=3, at=2u, rise=1u): 1 until 2 us, a straight ramp to 3 at 3 us.
  const auto w = make_step(1, 3, 2e-6, 1e-6);
  EXPECT_EQ(w->value(-1), 1);
  EXPECT_EQ(w->value(1e-6), 1);
  expect_close(w->value(2e-6), 1);
  expect_close(w->value(2.25e-6), 1.5);
  expect_close(w->value(2.5e-6), 2);
  expect_close(w->value(3e-6), 3);
  EXPECT_EQ(w->value(1), 3);
  expect_corners(w->corners(1e-5), {2e-6, 3e-6});
  expect_corners(w->corners(2.5e-6), {2e-6});
  EXPECT_EQ(w->describe(), "step(from=1, to=3, at=2 us, rise=1 us)");
}

TEST(Waveform, StepJumpIsRightContinuousAndAtZeroStillFromBefore) {
  // NETLIST.md section 5: right-continuous; a step at 0 is still `from` for t < 0.
  const auto w = make_step(1, 0, 10e-6, 0);
  EXPECT_EQ(w->value(10e-6 - 1e-12), 1);
  EXPECT_EQ(w->value(10e-6), 0);
  const auto at_zero = make_step(0, 5, 0, 0);
  EXPECT_EQ(at_zero->value(-1e-9), 0);
  EXPECT_EQ(at_zero->value_before_zero(), 0);
  EXPECT_EQ(at_zero->value(0), 5);
  EXPECT_TRUE(at_zero->corners(1).empty());  // corners are in (0, t_end]
  EXPECT_EQ(evaluate(at_zero->piece(0), 0), 5);
  // A ramp already under way at 0 (at < 0): the left limit at 0 is on the ramp.
  const auto early = make_step(0, 10, -1e-3, 2e-3);
  expect_close(early->value(-5), 5);
  expect_close(early->value(0), 5);
  expect_corners(early->corners(1), {1e-3});
}

PulseSpec trapezoid() {
  PulseSpec s;
  s.low = 0;
  s.high = 5;
  s.period = 10e-6;
  s.width = 3e-6;
  s.rise = 1e-6;
  s.fall = 2e-6;
  s.start = 1e-6;
  s.count = 2;
  return s;
}

TEST(Waveform, PulseTrapezoidTrain) {
  // Pulse k begins at start + k*period: ramp 1 us up, 3 us high, 2 us down, low.
  const auto w = make_pulse(trapezoid());
  EXPECT_EQ(w->value(-1), 0);
  EXPECT_EQ(w->value(0.5e-6), 0);
  expect_close(w->value(1.5e-6), 2.5, 5);   // half way up the rise
  expect_close(w->value(2e-6), 5, 5);       // top of the rise
  EXPECT_EQ(w->value(3e-6), 5);             // high
  expect_close(w->value(6e-6), 2.5, 5);     // half way down the fall (5 us .. 7 us)
  EXPECT_EQ(w->value(8e-6), 0);             // low rest
  expect_close(w->value(11.5e-6), 2.5, 5);  // second pulse
  EXPECT_EQ(w->value(14e-6), 5);
  EXPECT_EQ(w->value(21.5e-6), 0);          // count = 2: no third pulse
  EXPECT_EQ(w->value(1), 0);
  expect_corners(w->corners(1e-3),
                 {1e-6, 2e-6, 5e-6, 7e-6, 11e-6, 12e-6, 15e-6, 17e-6});
  expect_corners(w->corners(12.5e-6), {1e-6, 2e-6, 5e-6, 7e-6, 11e-6, 12e-6});
  EXPECT_EQ(w->describe(),
            "pulse(low=0, high=5, period=10 us, width=3 us, rise=1 us, fall=2 us, start=1 us, "
            "count=2)");
}

TEST(Waveform, PulseDutyWithJumpsForever) {
  // freq=100k, duty=25%: period 10 us, width 2.5 us (duty*period); rise = fall = 0.
  PulseSpec s;
  s.low = -1;
  s.high = 1;
  s.period = 1 / 100e3;
  s.width = 0.25 * s.period;
  const auto w = make_pulse(s);
  EXPECT_EQ(w->value(-1), -1);  // left limit at 0: before the first jump
  EXPECT_EQ(w->value(0), 1);    // right-continuous: the jump at 0 holds from 0
  EXPECT_EQ(w->value(2.4e-6), 1);
  EXPECT_EQ(w->value(2.5e-6), -1);
  EXPECT_EQ(w->value(9.99e-6), -1);
  EXPECT_EQ(w->value(10e-6), 1);
  EXPECT_EQ(w->value(1e-3 + 1e-6), 1);  // forever: pulse 100
  expect_corners(w->corners(25e-6), {2.5e-6, 10e-6, 12.5e-6, 20e-6, 22.5e-6});
}

TEST(Waveform, PulseFillingThePeriodHasNoZeroLengthPieces) {
  // rise + width + fall = period: the fall ends where the next rise begins.
  PulseSpec s;
  s.period = 1e-6;
  s.rise = 0.3e-6;
  s.width = 0.4e-6;
  s.fall = 0.3e-6;
  s.count = 3;
  const auto w = make_pulse(s);
  expect_corners(w->corners(10e-6), {0.3e-6, 0.7e-6, 1e-6, 1.3e-6, 1.7e-6, 2e-6, 2.3e-6, 2.7e-6,
                                     3e-6});
  double t = 0;
  int pieces = 0;
  while (t < 10e-6 && pieces < 100) {
    const auto p = w->piece(t);
    ASSERT_GT(p.end, t);
    if (std::isinf(p.end)) break;
    EXPECT_GT(p.end - t, 0.1e-6) << "a sliver of a piece at " << t;
    t = p.end;
    ++pieces;
  }
  EXPECT_EQ(pieces, 9);
  EXPECT_EQ(w->value(3e-6), 0);
  expect_close(w->value(2.85e-6), 0.5);
}

TEST(Waveform, PulseLongTrainCornersAreExactAndFast) {
  // 2 million corners: each computed as start + k*period + offset, so the last
  // one carries no accumulated drift.
  PulseSpec s;
  s.period = 1e-9;
  s.width = 0.5e-9;
  s.start = 3e-9;
  const auto w = make_pulse(s);
  const auto begin = std::chrono::steady_clock::now();
  const auto c = w->corners(1e-3 + 0.25e-9);
  const double seconds =
      std::chrono::duration<double>(std::chrono::steady_clock::now() - begin).count();
  // Pulses 0..999997 start by t_end; the last one's fall is after t_end.
  ASSERT_EQ(c.size(), 2u * 999998u - 1u);
  EXPECT_EQ(c.front(), 3e-9);
  EXPECT_EQ(c.back(), 3e-9 + 999997.0 * 1e-9);
  EXPECT_LT(seconds, 2.0);  // common practice, no source: linear in the output
  // A piece far down the train is still located exactly.
  const auto p = w->piece(c[1500001]);
  EXPECT_EQ(p.begin, c[1500001]);
  EXPECT_EQ(p.end, c[1500002]);
}

TEST(Waveform, SineWithDecayAndPhase) {
  // sine(freq=1k, amp=2, mean=0.5, phase=0.3, start=1m, tau=2m):
  // mean + amp*exp(-(t-start)/tau)*sin(2 pi f (t-start) + phase); before start its value at start.
  const auto w = make_sine(1e3, 2, 0.5, 0.3, 1e-3, 2e-3);
  const double at_start = 0.5 + 2 * std::sin(0.3);
  expect_close(w->value(-1), at_start);
  expect_close(w->value(0.5e-3), at_start);
  expect_close(w->value(1e-3), at_start);
  for (double t : {1.37e-3, 2.0e-3, 4.123e-3, 20.5e-3}) {
    const double x = t - 1e-3;
    expect_close(w->value(t), 0.5 + 2 * std::exp(-x / 2e-3) * std::sin(2 * kPi * 1e3 * x + 0.3),
                 2, 1e-12);
  }
  expect_corners(w->corners(1), {1e-3});
  EXPECT_EQ(w->describe(),
            "sine(freq=1 kHz, amp=2, mean=0.5, phase=0.3, start=1 ms, tau=2 ms)");
  // No decay: tau <= 0 or infinite (waveform.hpp).
  const auto steady = make_sine(50, 325, 0, 0, 0, 0);
  expect_close(steady->value(5e-3), 325, 325);  // a quarter period of 50 Hz
  expect_close(steady->value(1.005), 325, 325, 1e-12);
  EXPECT_TRUE(steady->corners(1).empty());
}

TEST(Waveform, Approach) {
  // approach(to=5, tau=1m, from=1, at=2m): from until at, then to + (from-to) exp(-(t-at)/tau).
  const auto w = make_approach(5, 1e-3, 1, 2e-3);
  EXPECT_EQ(w->value(-1), 1);
  EXPECT_EQ(w->value(1.9e-3), 1);
  expect_close(w->value(2e-3), 1);
  expect_close(w->value(3e-3), 5 - 4 * std::exp(-1.0));
  expect_close(w->value(7e-3), 5 - 4 * std::exp(-5.0));
  expect_corners(w->corners(1), {2e-3});
}

TEST(Waveform, PointsHeldFlatOutside) {
  const auto w = make_points({{0, 0}, {1e-3, 10}, {3e-3, 4}});
  EXPECT_EQ(w->value(-1), 0);
  expect_close(w->value(0.5e-3), 5, 10);
  expect_close(w->value(2e-3), 7, 10);
  EXPECT_EQ(w->value(3e-3), 4);
  EXPECT_EQ(w->value(1), 4);
  expect_corners(w->corners(1), {1e-3, 3e-3});
  // Starting before 0 (a scope capture triggered at 0): the value at 0 is interpolated.
  const auto capture = make_points({{-1e-3, 2}, {1e-3, 4}});
  expect_close(capture->value(-5), 3);
  expect_close(capture->value(0), 3);
  expect_corners(capture->corners(1), {1e-3});
  // A single point is a constant.
  EXPECT_EQ(make_points({{2e-3, 7}})->value(0), 7);
}

TEST(Waveform, SamplesDescribeNamesTheFile) {
  const auto w = make_samples({{0, 1}, {1e-6, 2}}, "scope.csv");
  EXPECT_NE(w->describe().find("scope.csv"), std::string::npos);
  expect_close(w->value(0.5e-6), 1.5);
}

TEST(Waveform, SumAndScaled) {
  // (12V + sine(amp=0.5V, freq=100k)) and (2 * step(...)).
  const auto w = make_sum({make_constant(12), make_sine(100e3, 0.5, 0, 0, 0, 0)});
  expect_close(w->value(2.5e-6), 12.5);  // a quarter period of 100 kHz
  expect_close(w->value(-1), 12);
  EXPECT_EQ(w->describe(), "(12 + sine(freq=100 kHz, amp=0.5, mean=0, phase=0, start=0 s))");
  const auto s = make_scaled(2, make_step(0, 3, 1e-3, 0));
  EXPECT_EQ(s->value(0), 0);
  EXPECT_EQ(s->value(1e-3), 6);
  EXPECT_EQ(evaluate(s->piece(2e-3), 5e-3), 6);
  expect_corners(s->corners(1), {1e-3});
  const auto mix = make_sum({make_step(0, 1, 1e-3, 0), make_step(0, 1, 2e-3, 1e-3),
                             make_step(0, 1, 1e-3, 0)});
  expect_corners(mix->corners(1), {1e-3, 2e-3, 3e-3});  // sorted, duplicates merged
  EXPECT_EQ(mix->piece(1e-3).end, 2e-3);
}

TEST(Waveform, FormulaIsNotExact) {
  int calls = 0;
  const auto w = make_formula(
      [&calls](double t) {
        ++calls;
        return 5 * (1 - std::exp(-t / 2e-6));
      },
      "5*(1-exp(-t/2u))");
  EXPECT_FALSE(w->is_exact());
  EXPECT_THROW(w->piece(0), std::logic_error);
  expect_close(w->value(2e-6), 5 * (1 - std::exp(-1.0)));
  EXPECT_EQ(w->value(-1), 0);  // the value at 0
  EXPECT_GT(calls, 0);
  EXPECT_EQ(w->describe(), "formula(5*(1-exp(-t/2u)))");
  const auto sum = make_sum({make_constant(1), w});
  EXPECT_FALSE(sum->is_exact());
  EXPECT_THROW(sum->piece(0), std::logic_error);
}

// --- property: piece() agrees with value() inside each piece ------------------

std::vector<std::pair<std::string, WaveformPtr>> exact_zoo() {
  PulseSpec jumps;
  jumps.low = 0.2;
  jumps.high = 3.3;
  jumps.period = 7e-6;
  jumps.width = 2e-6;
  jumps.start = 0.5e-6;
  return {
      {"step", make_step(1, -2, 3e-6, 4e-6)},
      {"pulse", make_pulse(trapezoid())},
      {"pulse_jumps", make_pulse(jumps)},
      {"sine", make_sine(1.3e6, 2, 0.5, 0.7, 2e-6, 5e-6)},
      {"sine_nodecay", make_sine(2.2e5, 1, 0, -1.1, 0, 0)},
      {"approach", make_approach(5, 4e-6, -1, 1e-6)},
      {"points", make_points({{-1e-6, 0}, {2e-6, 1}, {9e-6, -3}, {15e-6, 0.5}})},
      {"sum", make_sum({make_pulse(trapezoid()), make_sine(1e6, 0.1, 0, 0, 0, 3e-6),
                        make_scaled(-0.5, make_approach(2, 1e-6, 0, 4e-6))})},
  };
}

TEST(WaveformProperty, PieceAgreesWithValueOnRandomInstants) {
  std::mt19937_64 random(20240611);  // fixed seed: reproducible
  constexpr double kSpan = 30e-6;
  std::uniform_real_distribution<double> instant(0, kSpan);
  std::uniform_real_distribution<double> unit(0, 1);
  for (const auto& [name, w] : exact_zoo()) {
    // Pieces from random instants, from t = 0 and from every corner.
    std::vector<double> begins = w->corners(kSpan);
    begins.push_back(0);
    for (int k = 0; k < 200; ++k) begins.push_back(instant(random));
    for (double begin : begins) {
      const WaveformPiece p = w->piece(begin);
      ASSERT_EQ(p.begin, begin) << name;
      ASSERT_GT(p.end, begin) << name << " at " << begin;
      const double end = std::min(p.end, kSpan * 1.5);
      expect_close(evaluate(p, begin), w->value(begin), 5, 1e-12);
      for (int k = 0; k < 20; ++k) {
        const double t = begin + (end - begin) * unit(random);
        if (t >= end) continue;
        EXPECT_NEAR(evaluate(p, t), w->value(t), 1e-11 * 5) << name << " at " << t
                                                            << " piece from " << begin;
      }
    }
  }
}

TEST(WaveformProperty, PieceEndsAreTheCorners) {
  constexpr double kSpan = 30e-6;
  for (const auto& [name, w] : exact_zoo()) {
    std::vector<double> ends;
    double t = 0;
    for (int guard = 0; guard < 1000; ++guard) {
      const auto p = w->piece(t);
      if (!(p.end <= kSpan)) break;
      ends.push_back(p.end);
      t = p.end;
    }
    EXPECT_EQ(ends, w->corners(kSpan)) << name;
  }
}

TEST(WaveformProperty, LeftLimitAtZero) {
  // NETLIST.md section 5: before t = 0 every waveform holds its value at 0 from the left.
  for (const auto& [name, w] : exact_zoo()) {
    EXPECT_EQ(w->value(-1), w->value(-1e-300)) << name;
    EXPECT_EQ(w->value(-1), w->value_before_zero()) << name;
  }
}

// --- crossings --------------------------------------------------------------

TEST(WaveformCrossings, SineGateAgainstArcsine) {
  // sin(2 pi f t) = 0.5 up at t = (asin(0.5)/(2 pi) + k)/f, down at (1/2 - asin(0.5)/(2 pi) + k)/f
  // (trigonometry; asin(0.5) = pi/6).
  constexpr double f = 1e3;
  const auto w = make_sine(f, 1, 0, 0, 0, 0);
  const auto c = w->crossings(0.5, 10e-3);
  ASSERT_EQ(c.size(), 20u);
  const double a = std::asin(0.5) / (2 * kPi);
  for (int k = 0; k < 10; ++k) {
    const double up = (a + k) / f, down = (0.5 - a + k) / f;
    EXPECT_EQ(c[2 * k].second, 1);
    EXPECT_NEAR(c[2 * k].first, up, 4e-15 * up);
    EXPECT_EQ(c[2 * k + 1].second, -1);
    EXPECT_NEAR(c[2 * k + 1].first, down, 4e-15 * down);
  }
}

TEST(WaveformCrossings, DampedSineWithOffsetBrackets) {
  // Damped sine: no closed form for the crossing; check each one brackets the
  // level and that the count matches the envelope: amp*exp(-t/tau) > |level - mean|
  // only while t < tau*ln(amp/|level-mean|) (algebra).
  const auto w = make_sine(10e3, 1, 0, 0.4, 0, 0.5e-3);
  const double level = 0.3;
  const auto c = w->crossings(level, 5e-3);
  const double last_possible = 0.5e-3 * std::log(1 / level);
  ASSERT_FALSE(c.empty());
  // It starts above the level (sin(0.4) > 0.3) and ends below: an odd count.
  EXPECT_GT(w->value(0), level);
  EXPECT_EQ(c.size() % 2, 1u);
  EXPECT_EQ(c.front().second, -1);
  for (const auto& [t, direction] : c) {
    EXPECT_LT(t, last_possible);
    const double before = w->value(t * (1 - 1e-9)), after = w->value(t * (1 + 1e-9));
    EXPECT_EQ(direction, after > level ? 1 : -1);
    EXPECT_TRUE((before - level) * (after - level) <= 0) << t;
  }
  // Up to 10 kHz * 0.6 ms = 6 periods above the level, two crossings each.
  EXPECT_GE(c.size(), 10u);
  EXPECT_LE(c.size(), 14u);
}

TEST(WaveformCrossings, PulseGateRampsAndJumps) {
  PulseSpec s;
  s.period = 5e-6;
  s.width = 1e-6;
  s.rise = 10e-9;
  s.fall = 20e-9;
  s.count = 3;
  const auto w = make_pulse(s);
  // The 0.5 level is crossed half way up each rise and half way down each fall.
  const auto c = w->crossings(0.5, 1e-3);
  ASSERT_EQ(c.size(), 6u);
  for (int k = 0; k < 3; ++k) {
    EXPECT_NEAR(c[2 * k].first, k * 5e-6 + 5e-9, 1e-20);
    EXPECT_EQ(c[2 * k].second, 1);
    EXPECT_NEAR(c[2 * k + 1].first, k * 5e-6 + 10e-9 + 1e-6 + 10e-9, 1e-20);
    EXPECT_EQ(c[2 * k + 1].second, -1);
  }
  // A jump across the level counts at the jump instant.
  const auto off = make_step(1, 0, 10e-6, 0)->crossings(0.5, 1e-3);
  ASSERT_EQ(off.size(), 1u);
  EXPECT_EQ(off[0].first, 10e-6);
  EXPECT_EQ(off[0].second, -1);
}

TEST(WaveformCrossings, TouchingIsNotCrossing) {
  EXPECT_TRUE(make_step(0, 0.5, 1e-6, 1e-6)->crossings(0.5, 1).empty());
  // A jump at exactly t = 0 is outside (0, t_end] (waveform.hpp).
  EXPECT_TRUE(make_step(0, 1, 0, 0)->crossings(0.5, 1).empty());
  // A jump at t_end is inside.
  EXPECT_EQ(make_step(0, 1, 1e-3, 0)->crossings(0.5, 1e-3).size(), 1u);
}

TEST(WaveformCrossings, FormulaBySampling) {
  const auto w = make_formula([](double t) { return std::sin(2 * kPi * 1e3 * t); }, "sin(2*pi*1k*t)");
  const auto c = w->crossings(0.5, 3e-3);
  ASSERT_EQ(c.size(), 6u);
  EXPECT_NEAR(c[0].first, 1e-3 / 12, 1e-15);  // asin(0.5) = pi/6
}

}  // namespace
}  // namespace ringdown
