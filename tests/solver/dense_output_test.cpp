// Dense output of the exact engine (solver/dense_output.hpp): the trajectory between
// samples against closed forms (value, derivative, left limits at corners and switch
// instants), figures (solver/figures.hpp) on the engine's trajectory against textbook
// values, the bracket step, the output-step and run-length warnings, and the memory-budget
// path against the full one. Circuits are built by hand (circuit_builder.hpp) or loaded
// from text; every numerical check names its source beside it.
#include <gtest/gtest.h>

#include <algorithm>
#include <cmath>
#include <numbers>
#include <string>
#include <vector>

#include "circuit_builder.hpp"
#include "parser/load.hpp"
#include "solver/dense_output.hpp"
#include "solver/figures.hpp"
#include "solver/transient.hpp"

namespace {

using ringdown::Diagnostics;
using ringdown::Dimension;
using ringdown::FigureCall;
using ringdown::Quantity;
using ringdown::Severity;
using ringdown::Signal;
using ringdown::test::CircuitBuilder;
namespace solver = ringdown::solver;
constexpr double kPi = std::numbers::pi;

struct DenseRun {
  solver::SampledRun run;
  Diagnostics diagnostics;
  const solver::Trajectory& tr() const { return *run.summary.trajectory; }
};

DenseRun run_dense(const ringdown::Circuit& c, const std::vector<Signal>& signals, double until,
                   double every, bool dc = true, std::vector<Signal> extra = {},
                   bool dense = true) {
  solver::TransientOptions opt;
  opt.until = until;
  opt.every = every;
  opt.initial_dc = dc;
  opt.dense_output = dense;
  opt.trajectory_signals = std::move(extra);
  DenseRun r;
  r.run = solver::run_transient_sampled(c, signals, opt, r.diagnostics);
  for (const auto& d : r.diagnostics)
    if (d.severity == Severity::Error) ADD_FAILURE() << "diagnostic: " << d.message;
  EXPECT_EQ(r.run.summary.status, solver::Status::Ok);
  if (dense) {
    EXPECT_TRUE(r.run.summary.trajectory != nullptr);
  }
  return r;
}

bool has_warning(const Diagnostics& d, const std::string& text) {
  return std::any_of(d.begin(), d.end(), [&](const ringdown::Diagnostic& x) {
    return x.severity == Severity::Warning && x.message.find(text) != std::string::npos;
  });
}

FigureCall call(const std::string& function, std::map<std::string, double> args = {}) {
  FigureCall c;
  c.function = function;
  c.text = function + "(out)";
  Signal s;
  s.name = "out";
  s.unit = Dimension::volt();
  c.signal = s;
  c.args = std::move(args);
  return c;
}

double figure(const solver::Trajectory& tr, const std::string& f, std::size_t k = 0,
              std::map<std::string, double> args = {}) {
  const solver::FigureValue v = solver::evaluate_figure(call(f, std::move(args)), tr, k, std::nullopt);
  EXPECT_TRUE(v.ok) << f << ": " << v.error;
  return v.value;
}

// Series RLC (source - R - L - C - gnd) from rest, a step of V at `at`: capacitor voltage
// v = V (1 - e^{-a s} (cos wd s + (a / wd) sin wd s)), s = t - at, a = R / 2L,
// wd = sqrt(1/LC - a^2); its derivative V (w0^2 / wd) e^{-a s} sin wd s, and the loop
// current C v' (Nilsson & Riedel, Electric Circuits, second-order circuits; from memory).
struct SeriesRlc {
  double V = 1, R = 20, L = 1e-3, C = 1e-6, at = 0;
  double a() const { return R / (2 * L); }
  double w0() const { return 1 / std::sqrt(L * C); }
  double wd() const { return std::sqrt(w0() * w0() - a() * a()); }
  double zeta() const { return a() / w0(); }
  double period() const { return 2 * kPi / wd(); }
  double v(double t) const {
    const double s = t - at;
    if (s < 0) return 0;
    return V * (1 - std::exp(-a() * s) * (std::cos(wd() * s) + a() / wd() * std::sin(wd() * s)));
  }
  double dv(double t) const {
    const double s = t - at;
    if (s < 0) return 0;
    return V * w0() * w0() / wd() * std::exp(-a() * s) * std::sin(wd() * s);
  }
  // Ogata, Modern Control Engineering, second-order systems (from memory): maximum
  // overshoot exp(-pi zeta / sqrt(1 - zeta^2)) at pi / wd after the step.
  double overshoot() const { return std::exp(-kPi * zeta() / std::sqrt(1 - zeta() * zeta())); }

  CircuitBuilder build(int& cap, int& ind) const {
    CircuitBuilder b;
    b.voltage("V1", "in", "gnd", ringdown::make_step(0, V, at, 0));
    b.resistor("R1", "in", "a", R);
    ind = b.inductor("L1", "a", "out", L);
    cap = b.capacitor("C1", "out", "gnd", C);
    return b;
  }
};

SeriesRlc with_zeta(double zeta) {
  SeriesRlc s;
  s.R = 2 * zeta * std::sqrt(s.L / s.C);
  return s;
}

TEST(DenseOutput, ValueAndDerivativeBetweenSamplesMatchTheSeriesRlc) {
  SeriesRlc rlc;
  rlc.at = 103e-6;  // between samples: a corner inside an output interval
  int cap = 0, ind = 0;
  CircuitBuilder b = rlc.build(cap, ind);
  const double every = rlc.period() / 10, until = 95 * every;
  const DenseRun r = run_dense(b.c, {b.v("out"), b.q(ind, Quantity::Current), b.v("in")}, until,
                               every, false);
  const solver::Trajectory& tr = r.tr();
  ASSERT_EQ(tr.corners().size(), 1u);
  EXPECT_EQ(tr.corners()[0], rlc.at);
  const double peak = rlc.V * (1 + rlc.overshoot());
  const double dpeak = rlc.V * rlc.w0() * rlc.w0() / rlc.wd();
  double err_v = 0, err_d = 0, err_i = 0;
  for (int k = 0; k < 1997; ++k) {
    const double t = until * (k + 0.5) / 1997;  // almost never on the grid
    err_v = std::max(err_v, std::abs(tr.value(0, t) - rlc.v(t)));
    err_d = std::max(err_d, std::abs(tr.derivative(0, t) - rlc.dv(t)));
    // The loop current is C v' (the capacitor's law).
    err_i = std::max(err_i, std::abs(tr.value(1, t) - rlc.C * rlc.dv(t)));
  }
  // Closed form above (Nilsson & Riedel; from memory), to 1e-10 of the peak.
  EXPECT_LT(err_v, 1e-10 * peak);
  EXPECT_LT(err_d, 1e-10 * dpeak);
  EXPECT_LT(err_i, 1e-10 * rlc.C * dpeak);
  // At the samples the trajectory is the stored state: the streamed values exactly.
  for (std::size_t k = 0; k < r.run.time.size(); k += 7)
    EXPECT_EQ(tr.value(0, r.run.time[k]), r.run.values[0][k]);
  // The source node steps at the corner: left limit 0, right limit V (the step's
  // definition, NETLIST.md section 5); the capacitor voltage and the current are continuous
  // there (no impulse through an inductor), and v' = i / C just after.
  EXPECT_EQ(tr.value_before(2, rlc.at), 0.0);
  EXPECT_DOUBLE_EQ(tr.value(2, rlc.at), rlc.V);
  EXPECT_NEAR(tr.value_before(0, rlc.at), 0.0, 1e-15);
  EXPECT_NEAR(tr.derivative_before(1, rlc.at), 0.0, 1e-12);
  // Just after the step the whole V falls across L: di/dt = V / L (Faraday's law).
  EXPECT_NEAR(tr.derivative(1, rlc.at), rlc.V / rlc.L, 1e-9 * rlc.V / rlc.L);
}

TEST(DenseOutput, LeftAndRightLimitsAtASwitchInstant) {
  // A capacitor charged through R from 1 V; the switch in series opens at ts. Before: the
  // current is (V - v) / R with v = V (1 - e^{-t/RC}) (first-order charging, Hayt,
  // Kemmerly & Durbin, Engineering Circuit Analysis; from memory); after, it goes on
  // charging through the open switch's 1 GOhm, v = 1 - (1 - v(ts)) e^{-(t - ts)/((R + Roff) C)}
  // (the same law), and the current is (1 - v) / (R + Roff).
  CircuitBuilder b;
  const double R = 1e3, C = 1e-6, ts = 1.234e-3, tau = R * C;
  b.voltage("V1", "in", "gnd", ringdown::make_step(0, 1, 0, 0));
  b.switch_("S1", "in", "m", ringdown::make_step(1, 0, ts, 0), 1e-9, 1e9);
  const int r1 = b.resistor("R1", "m", "out", R);
  b.capacitor("C1", "out", "gnd", C);
  const DenseRun r = run_dense(b.c, {b.v("out"), b.q(r1, Quantity::Current)}, 3e-3, 1e-4, false);
  const solver::Trajectory& tr = r.tr();
  ASSERT_EQ(tr.corners().size(), 1u);
  const double t0 = tr.corners()[0];
  EXPECT_NEAR(t0, ts, 1e-15);
  const double v_ts = 1 - std::exp(-ts / tau);
  EXPECT_NEAR(tr.value_before(1, t0), (1 - v_ts) / R, 1e-12 / R);
  EXPECT_NEAR(tr.value(1, t0), (1 - v_ts) / (R + 1e9), 1e-9 * (1 - v_ts) / 1e9);
  EXPECT_NEAR(tr.value(0, 2.5e-3), 1 - (1 - v_ts) * std::exp(-(2.5e-3 - ts) / ((R + 1e9) * C)),
              1e-12);
  EXPECT_NEAR(tr.derivative_before(0, t0), (1 - v_ts) / tau, 1e-9 / tau);
}

TEST(DenseOutput, StreamedValuesDoNotDependOnDenseOutput) {
  // A pulse train with corners between samples (cached as one matrix per pattern after
  // its second use): the streamed samples are bit for bit the same with dense output.
  CircuitBuilder b;
  ringdown::PulseSpec p;
  p.low = 0;
  p.high = 1;
  p.period = 1.03e-4;
  p.width = 0.41e-4;
  p.rise = 2e-6;
  p.fall = 3e-6;
  b.voltage("V1", "in", "gnd", ringdown::make_pulse(p));
  b.resistor("R1", "in", "a", 50);
  b.inductor("L1", "a", "out", 1e-3);
  b.capacitor("C1", "out", "gnd", 1e-6);
  b.resistor("R2", "out", "gnd", 100);
  const DenseRun plain = run_dense(b.c, {b.v("out")}, 2e-3, 1e-5, false, {}, false);
  const DenseRun dense = run_dense(b.c, {b.v("out")}, 2e-3, 1e-5, false);
  EXPECT_EQ(plain.run.summary.trajectory, nullptr);
  ASSERT_EQ(plain.run.values[0].size(), dense.run.values[0].size());
  for (std::size_t k = 0; k < plain.run.values[0].size(); ++k)
    ASSERT_EQ(plain.run.values[0][k], dense.run.values[0][k]) << k;
  // And between samples the trajectory agrees with a run whose grid lands there: the
  // same engine at every/10 (step-size independence, common practice, no source).
  const DenseRun fine = run_dense(b.c, {b.v("out")}, 2e-3, 1e-6, false, {}, false);
  double err = 0, peak = 0;
  for (std::size_t k = 0; k < fine.run.time.size(); ++k) {
    err = std::max(err, std::abs(dense.tr().value(0, fine.run.time[k]) - fine.run.values[0][k]));
    peak = std::max(peak, std::abs(fine.run.values[0][k]));
  }
  EXPECT_LT(err, 1e-11 * peak);
}

class DenseSecondOrder : public ::testing::TestWithParam<double> {};

TEST_P(DenseSecondOrder, OvershootRingFrequencyAndDampingOnTheEngine) {
  const SeriesRlc rlc = with_zeta(GetParam());
  int cap = 0, ind = 0;
  CircuitBuilder b = rlc.build(cap, ind);
  // 40 time constants (the tail e^-40 is below the checks), ~9.7 samples per period.
  const double until = 40 / rlc.a(), every = rlc.period() / 9.7;
  const DenseRun r = run_dense(b.c, {b.v("out")}, until, every, false);
  const solver::Trajectory& tr = r.tr();
  // Ogata (from memory): overshoot exp(-pi zeta / sqrt(1 - zeta^2)) at tp = pi / wd.
  EXPECT_NEAR(figure(tr, "overshoot"), rlc.overshoot(), 1e-9);
  EXPECT_NEAR(figure(tr, "max"), 1 + rlc.overshoot(), 1e-9);
  EXPECT_NEAR(figure(tr, "tmax"), kPi / rlc.wd(), 1e-9 * kPi / rlc.wd());
  // Crossings of final are pi / wd apart: ringfreq = wd / (2 pi) (same closed form).
  if (GetParam() < 0.5) {
    EXPECT_NEAR(figure(tr, "ringfreq"), rlc.wd() / (2 * kPi), 1e-9 * rlc.wd());
    // Successive same-side extrema shrink by exp(-2 pi zeta / sqrt(1 - zeta^2)): the
    // logarithmic decrement gives zeta exactly (Thomson, Theory of Vibration with
    // Applications; from memory).
    EXPECT_NEAR(figure(tr, "damping"), rlc.zeta(), 1e-9);
  }
}

INSTANTIATE_TEST_SUITE_P(Zeta, DenseSecondOrder, ::testing::Values(0.1, 0.3, 0.7));

TEST(DenseOutput, CoarseGridPeakAndWindowMaxima) {
  // Exactly 10 samples per ring period: the bracket step is a tenth of that period, so the
  // figures use the samples alone, and the peak still comes out of the exact solution.
  const SeriesRlc rlc = with_zeta(0.2);
  int cap = 0, ind = 0;
  CircuitBuilder b = rlc.build(cap, ind);
  const double tp = kPi / rlc.wd();
  const DenseRun r = run_dense(b.c, {b.v("out")}, 30 * rlc.period(), rlc.period() / 10, false);
  const solver::Trajectory& tr = r.tr();
  // bracket_step: a tenth of 2 pi / wd (the one oscillatory mode; trajectory.hpp).
  EXPECT_NEAR(tr.bracket_step(), rlc.period() / 10, 1e-9 * rlc.period());
  // Ogata (from memory): peak 1 + Mp at tp = pi / wd.
  EXPECT_NEAR(figure(tr, "max"), 1 + rlc.overshoot(), 1e-9);
  EXPECT_NEAR(figure(tr, "tmax"), tp, 1e-9 * tp);
  // Inside [2.5 tp, 3.5 tp] the maximum is the second peak, 1 + Mp^3 at 3 tp (the n-th
  // extremum's excursion is Mp^n; same closed form).
  const double mp = rlc.overshoot();
  EXPECT_NEAR(figure(tr, "max", 0, {{"from", 2.5 * tp}, {"to", 3.5 * tp}}), 1 + mp * mp * mp, 1e-9);
  // Inside [1.2 tp, 1.8 tp] v falls all along (between the first peak and the first
  // trough): the maximum is v(1.2 tp) at the window's start.
  EXPECT_NEAR(figure(tr, "max", 0, {{"from", 1.2 * tp}, {"to", 1.8 * tp}}), rlc.v(1.2 * tp), 1e-12);
  EXPECT_NEAR(figure(tr, "min", 0, {{"from", 1.2 * tp}, {"to", 2.6 * tp}}), 1 - mp * mp, 1e-9);
  // No alias warning at 10 samples per period; at 2 samples per period it warns.
  EXPECT_FALSE(has_warning(r.diagnostics, "coarser than a third"));
  const DenseRun coarse = run_dense(b.c, {b.v("out")}, 30 * rlc.period(), rlc.period() / 2, false);
  EXPECT_TRUE(has_warning(coarse.diagnostics, "coarser than a third"));
  EXPECT_NEAR(figure(coarse.tr(), "max"), 1 + rlc.overshoot(), 1e-9);
}

TEST(DenseOutput, FirstOrderRiseSettleAndEnergy) {
  // RC charged from a 1 V step at t = 0: v = 1 - e^{-t/tau} (first-order circuits, Hayt,
  // Kemmerly & Durbin; from memory): 10-90 % rise tau ln 9, 2 % settling tau ln 50.
  CircuitBuilder b;
  const double R = 1e3, C = 1e-6, tau = R * C, V = 1;
  b.voltage("V1", "in", "gnd", ringdown::make_step(0, V, 0, 0));
  const int r1 = b.resistor("R1", "in", "out", R);
  b.capacitor("C1", "out", "gnd", C);
  // Figure signals the run does not stream: R1.v and R1.i, after the streamed `out`.
  const DenseRun r = run_dense(b.c, {b.v("out")}, 40 * tau, tau / 7, false,
                               {b.q(r1, Quantity::Voltage), b.q(r1, Quantity::Current)});
  const solver::Trajectory& tr = r.tr();
  EXPECT_EQ(r.run.values.size(), 1u);  // the extras are not streamed
  EXPECT_NEAR(figure(tr, "rise"), tau * std::log(9.0), 1e-9 * tau);
  EXPECT_NEAR(figure(tr, "settle"), tau * std::log(50.0), 1e-9 * tau);
  // Energy dissipated in R while charging C from a step: C V^2 / 2, whatever R (energy
  // balance; any circuits text, from memory).
  FigureCall e;
  e.function = "energy";
  e.text = "energy(R1)";
  const solver::FigureValue energy = solver::evaluate_figure(e, tr, 0, std::make_pair(1, 2));
  ASSERT_TRUE(energy.ok) << energy.error;
  EXPECT_NEAR(energy.value, C * V * V / 2, 1e-9 * C * V * V / 2);
  // The extra signals themselves: i = (V / R) e^{-t/tau}, v_R = V e^{-t/tau}.
  EXPECT_NEAR(tr.value(2, 0.37 * tau), V / R * std::exp(-0.37), 1e-12 * V / R);
  EXPECT_NEAR(tr.value(1, 1.5 * tau), V * std::exp(-1.5), 1e-12);
  // RC only: no oscillation, so no bracket step (the figures refine by their default).
  EXPECT_EQ(tr.bracket_step(), 0.0);
}

TEST(DenseOutput, SineRmsAndPulseTrainMeanAndRms) {
  // Sine of amplitude 2 V about 0.5 V at 1 kHz across a resistor (the node is the source):
  // rms over whole periods = sqrt(mean^2 + amp^2 / 2), mean = 0.5 (definitions).
  CircuitBuilder b;
  const double amp = 2, mean = 0.5, f = 1e3;
  b.voltage("V1", "in", "gnd", ringdown::make_sine(f, amp, mean, 0, 0, 0));
  b.resistor("R1", "in", "out", 1e3);
  b.capacitor("C1", "out", "gnd", 1e-7);
  ringdown::PulseSpec p;
  p.low = 0;
  p.high = 3;
  p.period = 1e-4;
  p.width = 0.3e-4;  // duty D = 0.3
  b.voltage("V2", "q", "gnd", ringdown::make_pulse(p));
  b.resistor("R2", "q", "gnd", 1e3);
  // 7.3 samples per sine period: the source's own oscillation sets the bracket step.
  const DenseRun r = run_dense(b.c, {b.v("in"), b.v("q")}, 10e-3, 1 / (7.3 * f), true);
  const solver::Trajectory& tr = r.tr();
  EXPECT_NEAR(tr.bracket_step(), 0.1 / f, 1e-9 / f);
  EXPECT_NEAR(figure(tr, "rms", 0, {{"from", 1e-3}, {"to", 9e-3}}),
              std::sqrt(mean * mean + amp * amp / 2), 1e-9);
  EXPECT_NEAR(figure(tr, "mean", 0, {{"from", 1e-3}, {"to", 9e-3}}), mean, 1e-9);
  // 7.3 samples per period resolve the sine; at 2.5 the alias warning names the source.
  EXPECT_FALSE(has_warning(r.diagnostics, "coarser than a third"));
  const DenseRun coarse = run_dense(b.c, {b.v("in")}, 10e-3, 1 / (2.5 * f), true, {}, false);
  EXPECT_TRUE(has_warning(coarse.diagnostics, "the waveform of V1"));
  // Rectangular pulse train of duty D and height h over whole periods: mean D h, rms
  // sqrt(D) h (definitions of the mean and rms of a periodic function).
  EXPECT_NEAR(figure(tr, "mean", 1, {{"from", 0}, {"to", 5e-3}}), 0.3 * 3, 1e-9);
  EXPECT_NEAR(figure(tr, "rms", 1, {{"from", 0}, {"to", 5e-3}}), std::sqrt(0.3) * 3, 1e-9);
}

TEST(DenseOutput, ThirdOrderButterworthOvershoot) {
  // circuits/butterworth_step.rlc with a longer run, so that `final` is the steady state to
  // far below 1e-9 (slowest time constant 3.18 us; 149 us is 47 of them).
  // Vout/(Vs/2) = 1/((p+1)(p^2+p+1)): by partial fractions the unit step response is
  // 1 - e^{-x} - (2/sqrt 3) e^{-x/2} sin(sqrt(3) x / 2), x = 2 pi fc t, whose maximum,
  // found with mpmath 1.3.0 findroot on its derivative at 30 digits, is
  // 1.0814654414460067 at x = 4.9222165074030 (handbook curves give about 8.1 %; Zverev,
  // Handbook of Filter Synthesis, 1967; from memory).
  const std::string text = R"(
fc = 100kHz
Rterm = 50Ohm
Cshunt = 1/(2*pi*fc*Rterm)
Lseries = 2*Rterm/(2*pi*fc)
voltage   Vs  src gnd  step(from=0, to=2V, at=1us)
resistor  Rs  src in   Rterm
capacitor C1  in  gnd  Cshunt
inductor  L2  in  out  Lseries
capacitor C3  out gnd  Cshunt
resistor  RL  out gnd  Rterm
transient until=150us every=50ns
record out
)";
  const auto loaded = ringdown::load_text(text, "butterworth.rlc");
  ASSERT_TRUE(loaded.ok()) << (loaded.diagnostics.empty() ? "" : loaded.diagnostics[0].message);
  const ringdown::Circuit& c = *loaded.circuit;
  const DenseRun r = run_dense(c, c.records, 150e-6, 50e-9);
  const solver::Trajectory& tr = r.tr();
  EXPECT_NEAR(figure(tr, "overshoot"), 0.0814654414460067, 1e-9);
  EXPECT_NEAR(figure(tr, "tmax"), 1e-6 + 4.9222165074030 / (2 * kPi * 1e5), 1e-9 * 1e-5);
}

TEST(DenseOutput, WarningsOnlyWhenTheyApply) {
  const SeriesRlc rlc = with_zeta(0.1);
  int cap = 0, ind = 0;
  CircuitBuilder b = rlc.build(cap, ind);
  b.c.transient->where.line = 7;
  const double tau = 1 / rlc.a(), every = rlc.period() / 10;
  const auto whole = [&](double until) { return every * std::round(until / every); };
  // Long enough and fine enough: no warning at all.
  {
    const DenseRun r = run_dense(b.c, {b.v("out")}, whole(6 * tau), every, false);
    for (const auto& d : r.diagnostics) EXPECT_NE(d.severity, Severity::Warning) << d.message;
  }
  // Two time constants: `final` is not the steady state; the warning sits on the transient
  // statement and names the time constant. Without dense output too.
  {
    const DenseRun r = run_dense(b.c, {b.v("out")}, whole(2 * tau), every, false, {}, false);
    EXPECT_TRUE(has_warning(r.diagnostics, "shorter than five time constants"));
    EXPECT_TRUE(has_warning(r.diagnostics, ringdown::format_si(tau, "s")));
    int count = 0;
    for (const auto& d : r.diagnostics)
      if (d.severity == Severity::Warning) {
        ++count;
        EXPECT_EQ(d.where.line, 7);
      }
    EXPECT_EQ(count, 1);
  }
  // A signal that does not show the ringing (the source node) gets no warning however
  // coarse the grid: visibility is per recorded signal.
  {
    const DenseRun r = run_dense(b.c, {b.v("in")}, 10 * rlc.period(), rlc.period(), false, {}, false);
    for (const auto& d : r.diagnostics) EXPECT_NE(d.severity, Severity::Warning) << d.message;
  }
}

TEST(DenseOutput, ConstantAndLosslessModesAreNotSlowModes) {
  // A loop of two inductances (a conserved circulating flux: a zero pole) and a lossless
  // LC tank (poles on the imaginary axis) never make the run "too short"; the RL part's
  // time constant (L1 || L2 = 0.5 mH over 1 kOhm, 0.5 us) is covered by 10 ms.
  CircuitBuilder b;
  b.voltage("V1", "in", "gnd", ringdown::make_step(0, 1, 0, 0));
  b.resistor("R1", "in", "a", 1e3);
  const int l1 = b.inductor("L1", "a", "gnd", 1e-3);
  b.inductor("L2", "a", "gnd", 1e-3);
  b.capacitor("C3", "t", "gnd", 1e-6, 1.0);
  b.inductor("L3", "t", "gnd", 1e-3);
  const DenseRun r = run_dense(b.c, {b.v("a"), b.q(l1, Quantity::Current), b.v("t")}, 10e-3,
                               2e-5, false, {}, false);
  for (const auto& d : r.diagnostics) EXPECT_NE(d.severity, Severity::Warning) << d.message;
}

TEST(DenseOutput, MemoryBudgetPathGivesTheSameValues) {
  // dense_stride: all checkpoints fit, or every s-th sample (events kept).
  EXPECT_EQ(solver::dense_stride(1000, 2, 10, 1e9), 1);
  EXPECT_EQ(solver::dense_stride(999, 0, 1, 8.0 * 100), 10);
  const SeriesRlc rlc = [] {
    SeriesRlc s = with_zeta(0.2);
    s.at = 3.3e-5;
    return s;
  }();
  int cap = 0, ind = 0;
  CircuitBuilder b = rlc.build(cap, ind);
  const std::vector<Signal> sig{b.v("out"), b.q(ind, Quantity::Current)};
  const double until = 20 * rlc.period(), every = rlc.period() / 10;
  const DenseRun full = run_dense(b.c, sig, until, every, false);
  solver::set_dense_budget_bytes(4096);  // ~100 checkpoints of 5 doubles: a stride of ~2
  const DenseRun thin = run_dense(b.c, sig, until, every, false);
  solver::set_dense_budget_bytes(0);
  double err = 0;
  for (int k = 0; k <= 3000; ++k) {
    const double t = until * k / 3000.0;
    for (std::size_t s = 0; s < 2; ++s) {
      const double scale = s == 0 ? 1.0 : rlc.C * rlc.V * rlc.w0();
      err = std::max(err, std::abs(full.tr().value(s, t) - thin.tr().value(s, t)) / scale);
      err = std::max(err, std::abs(full.tr().derivative(s, t) - thin.tr().derivative(s, t)) /
                              (scale * rlc.w0()));
    }
  }
  // Both are the exact solution (propagation from a checkpoint one step further back):
  // they agree to rounding (common practice, no source).
  EXPECT_LT(err, 1e-12);
  EXPECT_NEAR(figure(thin.tr(), "max"), 1 + rlc.overshoot(), 1e-9);
}

TEST(DenseOutput, AllSamplesInOnePassMatchTheSeriesRlcAndTheLookups) {
  // Trajectory::at_samples over a run with a source step between samples (two segments:
  // at rest, then driven), on the full checkpoint path and on the memory-budget path (every
  // other sample is no checkpoint and is looked up): against the closed form of the series
  // RLC (SeriesRlc above, Nilsson & Riedel) and against value()/derivative() at the same
  // instants, which it must reproduce to rounding (a product over the stored states instead
  // of a dot product per base; common practice, no source).
  const SeriesRlc rlc = [] {
    SeriesRlc s = with_zeta(0.15);
    s.at = 3.3e-5;
    return s;
  }();
  int cap = 0, ind = 0;
  CircuitBuilder b = rlc.build(cap, ind);
  // The capacitor's power v i is a program over two bases (a product), not a base itself.
  const std::vector<Signal> sig{b.v("out"), b.q(ind, Quantity::Current), b.q(cap, Quantity::Power)};
  const double until = 12 * rlc.period(), every = rlc.period() / 37;
  for (const double budget : {0.0, 4096.0}) {
    solver::set_dense_budget_bytes(budget);
    const DenseRun r = run_dense(b.c, sig, until, every, false);
    solver::set_dense_budget_bytes(0);
    const solver::Trajectory& tr = r.tr();
    const std::vector<double> times = tr.sample_times();
    const std::size_t n = times.size();
    const std::size_t which[] = {1, 0, 2, 1};  // repeated and out of order on purpose
    std::vector<double> v(4 * n), d(4 * n), v_only(4 * n);
    tr.at_samples(which, 4, v.data(), d.data());
    tr.at_samples(which, 4, v_only.data(), nullptr);
    const double i_scale = rlc.C * rlc.V * rlc.w0();
    double to_lookup = 0, to_closed = 0;
    for (std::size_t j = 0; j < 4; ++j) {
      const double scale = which[j] == 0 ? rlc.V : (which[j] == 1 ? i_scale : rlc.V * i_scale);
      for (std::size_t k = 0; k < n; ++k) {
        const double t = times[k];
        to_lookup = std::max({to_lookup, std::abs(v[j * n + k] - tr.value(which[j], t)) / scale,
                              std::abs(d[j * n + k] - tr.derivative(which[j], t)) / (scale * rlc.w0())});
        EXPECT_EQ(v[j * n + k], v_only[j * n + k]);
        const double exact = which[j] == 0   ? rlc.v(t)
                             : which[j] == 1 ? rlc.C * rlc.dv(t)
                                             : rlc.v(t) * rlc.C * rlc.dv(t);  // p = v i
        to_closed = std::max(to_closed, std::abs(v[j * n + k] - exact) / scale);
      }
    }
    EXPECT_LT(to_lookup, 1e-14) << "budget " << budget;
    EXPECT_LT(to_closed, 1e-11) << "budget " << budget;
  }
}

TEST(DenseOutput, AnInstantAskedAgainGivesTheSameValue) {
  // A root finder returns one of its own iterates and then asks its value: the trajectory
  // answers from the state it kept (no second propagation), so the value is the one given
  // the first time, bit for bit, however the instants in between were reached; and it is
  // the closed form (SeriesRlc, Nilsson & Riedel).
  const SeriesRlc rlc = with_zeta(0.1);
  int cap = 0, ind = 0;
  CircuitBuilder b = rlc.build(cap, ind);
  const DenseRun r = run_dense(b.c, {b.v("out")}, 5 * rlc.period(), rlc.period() / 10, false);
  const solver::Trajectory& tr = r.tr();
  const double t1 = 1.2345 * rlc.period(), t2 = 2.71 * rlc.period(), t3 = 1.2346 * rlc.period();
  const double first = tr.value(0, t1);
  const double d_first = tr.derivative(0, t1);
  (void)tr.value(0, t2);
  (void)tr.derivative(0, t3);
  EXPECT_EQ(tr.value(0, t1), first);
  EXPECT_EQ(tr.derivative(0, t1), d_first);
  EXPECT_NEAR(first, rlc.v(t1), 1e-12);
  EXPECT_NEAR(d_first, rlc.dv(t1), 1e-12 * rlc.V * rlc.w0());
}

}  // namespace
