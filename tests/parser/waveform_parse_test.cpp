// Waveform calls in sources and gates (NETLIST.md section 5): named
// arguments, defaults, required arguments, sums and multiples.
#include <gtest/gtest.h>

#include <cmath>
#include <filesystem>
#include <fstream>
#include <numbers>

#include "parser_test_util.hpp"

namespace ringdown {
namespace {

using testing::all_messages;
using testing::element;
using testing::expect_error;

WaveformPtr source(const std::string& waveform) {
  auto r = testing::load("voltage V1 a gnd " + waveform + "\nresistor R a gnd 1\n");
  EXPECT_TRUE(r.ok()) << waveform << "\n" << all_messages(r);
  if (!r.ok()) return nullptr;
  return element(*r.circuit, "V1").waveform;
}

TEST(WaveformParse, Step) {
  auto w = source("step(from=1V, to=5V, at=1m, rise=1m)");
  ASSERT_TRUE(w);
  EXPECT_DOUBLE_EQ(w->value(0), 1);
  EXPECT_DOUBLE_EQ(w->value(1.5e-3), 3);  // halfway up the straight ramp
  EXPECT_DOUBLE_EQ(w->value(3e-3), 5);
  auto d = source("step()");  // defaults from=0 to=1 at=0 rise=0
  ASSERT_TRUE(d);
  EXPECT_DOUBLE_EQ(d->value(-1), 0);  // before t = 0 a step at 0 is still `from`
  EXPECT_DOUBLE_EQ(d->value(0), 1);
}

TEST(WaveformParse, Pulse) {
  auto w = source("pulse(high=5V, period=10u, width=2u)");
  ASSERT_TRUE(w);
  EXPECT_DOUBLE_EQ(w->value(1e-6), 5);
  EXPECT_DOUBLE_EQ(w->value(5e-6), 0);
  auto f = source("pulse(low=-1, high=1, freq=100k, duty=50%, count=3)");
  ASSERT_TRUE(f);
  EXPECT_DOUBLE_EQ(f->value(2e-6), 1);
  EXPECT_DOUBLE_EQ(f->value(7e-6), -1);
  EXPECT_DOUBLE_EQ(f->value(35e-6), -1);  // after 3 pulses
}

TEST(WaveformParse, PulseErrors) {
  auto both = testing::load("voltage V1 a gnd pulse(period=1u, freq=1M, width=1n)\nresistor R a gnd 1\n");
  expect_error(both, 1, 0, "period= or freq=, not both");
  auto none = testing::load("voltage V1 a gnd pulse(width=1n)\nresistor R a gnd 1\n");
  expect_error(none, 1, 18, "pulse() needs period= or freq= (exactly one)");
  auto fit = testing::load("voltage V1 a gnd pulse(period=1u, width=1u, rise=1n)\nresistor R a gnd 1\n");
  expect_error(fit, 1, 18, "does not fit in the period");
  auto count = testing::load("voltage V1 a gnd pulse(period=1u, width=1n, count=1.5)\nresistor R a gnd 1\n");
  expect_error(count, 1, 51, "must be a whole number >= 1");
}

TEST(WaveformParse, Sine) {
  auto w = source("sine(freq=1k, amp=2V, mean=1V)");
  ASSERT_TRUE(w);
  EXPECT_NEAR(w->value(0.25e-3), 3, 1e-12);  // 1 + 2 sin(pi/2)
  auto missing = testing::load("voltage V1 a gnd sine(amp=1)\nresistor R a gnd 1\n");
  expect_error(missing, 1, 18, "sine() needs freq= (required)");
  auto tau = testing::load("voltage V1 a gnd sine(freq=1k, tau=0)\nresistor R a gnd 1\n");
  expect_error(tau, 1, 0, "tau must be > 0");
  auto deg = source("sine(freq=1k, phase=90deg)");
  ASSERT_TRUE(deg);
  EXPECT_NEAR(deg->value(0), 1, 1e-12);  // sin(90 deg) = 1
}

TEST(WaveformParse, Approach) {
  auto w = source("approach(to=12V, tau=1m)");
  ASSERT_TRUE(w);
  EXPECT_NEAR(w->value(1e-3), 12 * (1 - std::exp(-1.0)), 1e-12);  // to + (from-to) e^-1
  auto missing = testing::load("voltage V1 a gnd approach(tau=1m)\nresistor R a gnd 1\n");
  expect_error(missing, 1, 18, "approach() needs to= (required)");
}

TEST(WaveformParse, Points) {
  auto w = source("points(0 0, 1m 5V, 2m -5V)");
  ASSERT_TRUE(w);
  EXPECT_DOUBLE_EQ(w->value(0.5e-3), 2.5);
  EXPECT_DOUBLE_EQ(w->value(2e-3), -5);
  EXPECT_DOUBLE_EQ(w->value(1), -5);  // held after the last pair
  auto order = testing::load("voltage V1 a gnd points(0 0, 2m 1, 1m 2)\nresistor R a gnd 1\n");
  expect_error(order, 1, 36, "times must increase strictly");
  auto pairs = testing::load("voltage V1 a gnd points(0, 1)\nresistor R a gnd 1\n");
  expect_error(pairs, 1, 25, "takes pairs 'time value'");
  auto unit = testing::load("voltage V1 a gnd points(0 0, 1V 1)\nresistor R a gnd 1\n");
  expect_error(unit, 1, 30, "time is in V (voltage), but a time is in s");
}

TEST(WaveformParse, Formula) {
  auto w = source("formula(5*(1-exp(-t/2u))*sin(2*pi*1M*t))");
  ASSERT_TRUE(w);
  EXPECT_FALSE(w->is_exact());
  EXPECT_EQ(w->describe(), "formula(5*(1-exp(-t/2u))*sin(2*pi*1M*t))");
  const double t = 0.3e-6;
  EXPECT_NEAR(w->value(t), 5 * (1 - std::exp(-t / 2e-6)) * std::sin(2 * std::numbers::pi * 1e6 * t), 1e-12);
  auto bad = testing::load("voltage V1 a gnd formula(exp(t))\nresistor R a gnd 1\n");
  expect_error(bad, 1, 30, "exp() needs a dimensionless argument, not a value in s");
  auto unit = testing::load("voltage V1 a gnd formula(t/1s * 1A)\nresistor R a gnd 1\n");
  expect_error(unit, 1, 26, "is in A (current), but a voltage source's value is in V");
}

TEST(WaveformParse, SumsAndMultiples) {
  auto w = source("(12V + sine(amp=0.5V, freq=100k))");
  ASSERT_TRUE(w);
  EXPECT_NEAR(w->value(2.5e-6), 12.5, 1e-12);
  auto k = source("(2 * step(to=3V))");
  ASSERT_TRUE(k);
  EXPECT_DOUBLE_EQ(k->value(1), 6);
  auto d = source("(step(to=3V) - 1V)");
  ASSERT_TRUE(d);
  EXPECT_DOUBLE_EQ(d->value(1), 2);
  auto bad = testing::load("voltage V1 a gnd (12A + sine(amp=0.5V, freq=1k))\nresistor R a gnd 1\n");
  expect_error(bad, 1, 19, "is in A (current), but a voltage source's value is in V");
  auto prod = testing::load("voltage V1 a gnd (step() * step())\nresistor R a gnd 1\n");
  expect_error(prod, 1, 28, "a product of two waveforms is not a waveform");
}

TEST(WaveformParse, UnknownArgumentListsValidOnes) {
  auto r = testing::load("voltage V1 a gnd step(form=1)\nresistor R a gnd 1\n");
  expect_error(r, 1, 23, "unknown argument 'form' of step(); valid: from, to, at, rise",
               "did you mean 'from'?");
}

TEST(WaveformParse, ArgumentUnits) {
  auto r = testing::load("voltage V1 a gnd step(at=1V)\nresistor R a gnd 1\n");
  expect_error(r, 1, 26, "argument at is in V (voltage), but a time is in s");
  auto f = testing::load("current I1 a gnd sine(freq=1ms)\nresistor R a gnd 1\n");
  expect_error(f, 1, 28, "but a frequency is in Hz");
}

TEST(WaveformParse, WaveformOutsideASourceIsAnError) {
  auto r = testing::load("x = step()\n");
  expect_error(r, 1, 5, "step(...) is a waveform");
}

TEST(WaveformParse, Samples) {
  namespace fs = std::filesystem;
  const fs::path dir = fs::temp_directory_path() / "ringdown_p1_samples";
  fs::create_directories(dir);
  {
    std::ofstream csv(dir / "scope.csv");
    csv << "t,v\n0,0\n1e-3,2\n2e-3,4\n";
  }
  const std::string file = (dir / "circuit.rlc").string();
  auto r = load_text("voltage V1 a gnd samples(\"scope.csv\", time=1, value=\"v\", scale=0.5)\n"
                     "resistor R a gnd 1\n",
                     file);
  ASSERT_TRUE(r.ok()) << all_messages(r);
  const WaveformPtr& w = testing::element(*r.circuit, "V1").waveform;
  EXPECT_DOUBLE_EQ(w->value(1.5e-3), 1.5);  // halfway between 1 and 2 (scaled by 0.5)
  auto missing = load_text("voltage V1 a gnd samples(\"nope.csv\")\nresistor R a gnd 1\n", file);
  EXPECT_FALSE(missing.ok());
  const Diagnostic* d = testing::find_diagnostic(missing, "nope.csv");
  ASSERT_NE(d, nullptr) << all_messages(missing);
  EXPECT_EQ(d->where.line, 1);
  fs::remove_all(dir);
}

}  // namespace
}  // namespace ringdown
