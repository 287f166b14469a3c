// Figures (solver/figures.hpp) on closed-form trajectories: a second-order step response,
// a first-order step, a sine, a rectangular pulse train with corners, and the voltage and
// current of a resistor charging a capacitor. Each trajectory gives exact values and
// derivatives, so every figure can be compared with its closed form; each check names its
// source beside it. The output grids are deliberately coarse (about 10 samples per ring
// period, not aligned with the peaks) so that reading figures off the grid would fail.
#include <gtest/gtest.h>

#include <algorithm>
#include <cmath>
#include <functional>
#include <numbers>
#include <string>
#include <vector>

#include "solver/figures.hpp"
#include "solver/trajectory.hpp"

namespace {

using ringdown::CompareOp;
using ringdown::Dimension;
using ringdown::Expect;
using ringdown::FigureCall;
using ringdown::Signal;
using ringdown::solver::evaluate_figure;
using ringdown::solver::expect_holds;
using ringdown::solver::FigureValue;
using ringdown::solver::Trajectory;
constexpr double kPi = std::numbers::pi;

// A trajectory from closed-form functions of t with their exact derivatives.
class Analytic : public Trajectory {
 public:
  using Fn = std::function<double(double)>;
  Analytic(double end, double every, std::vector<Fn> value, std::vector<Fn> derivative,
           std::vector<double> corners = {}, double bracket = 0)
      : end_(end), value_(std::move(value)), derivative_(std::move(derivative)),
        corners_(std::move(corners)), bracket_(bracket) {
    const auto n = static_cast<long>(std::floor(end / every + 1e-9));
    for (long k = 0; k <= n; ++k) samples_.push_back(k * every);
    if (samples_.back() < end) samples_.push_back(end);
  }
  double start() const override { return 0; }
  double end() const override { return end_; }
  std::vector<double> corners() const override { return corners_; }
  std::vector<double> sample_times() const override { return samples_; }
  double value(std::size_t k, double t) const override { return value_.at(k)(t); }
  double derivative(std::size_t k, double t) const override { return derivative_.at(k)(t); }
  double bracket_step() const override { return bracket_; }

 private:
  double end_;
  std::vector<Fn> value_, derivative_;
  std::vector<double> corners_;
  std::vector<double> samples_;
  double bracket_;
};

FigureCall call(const std::string& function, const std::string& signal = "out",
                std::map<std::string, double> args = {}) {
  FigureCall c;
  c.function = function;
  c.text = function + "(" + signal + ")";
  Signal s;
  s.name = signal;
  s.unit = Dimension::volt();
  c.signal = s;
  c.args = std::move(args);
  return c;
}

FigureValue eval(const Trajectory& tr, const FigureCall& c) {
  return evaluate_figure(c, tr, 0, std::nullopt);
}

double value_of(const Trajectory& tr, const FigureCall& c) {
  const FigureValue v = eval(tr, c);
  EXPECT_TRUE(v.ok) << c.text << ": " << v.error;
  return v.value;
}

// Unit step response of w0^2 / (s^2 + 2 zeta w0 s + w0^2), 0 < zeta < 1:
// y = 1 - e^{-zeta w0 t} (cos wd t + zeta/sqrt(1-zeta^2) sin wd t),
// y' = (w0 / sqrt(1-zeta^2)) e^{-zeta w0 t} sin wd t.
// (Ogata, Modern Control Engineering, second-order systems; from memory.)
struct SecondOrder {
  double zeta, w0 = 2 * kPi * 1e3;  // 1 kHz natural frequency
  double wd() const { return w0 * std::sqrt(1 - zeta * zeta); }
  double ring_period() const { return 2 * kPi / wd(); }
  Analytic trajectory() const {
    const double z = zeta, w = w0, d = wd(), k = z / std::sqrt(1 - z * z);
    // 40 time constants: the tail e^{-40} is far below the 1e-9 the checks ask.
    const double end = 40 / (z * w);
    // 9.7 samples per ring period: the peaks fall between samples.
    const double every = ring_period() / 9.7;
    return Analytic(
        end, every,
        {[=](double t) { return 1 - std::exp(-z * w * t) * (std::cos(d * t) + k * std::sin(d * t)); }},
        {[=](double t) { return w / std::sqrt(1 - z * z) * std::exp(-z * w * t) * std::sin(d * t); }});
  }
  // Ogata (from memory): maximum overshoot Mp = exp(-pi zeta / sqrt(1 - zeta^2)), at
  // tp = pi / wd; the n-th extremum's excursion is Mp^n.
  double overshoot() const { return std::exp(-kPi * zeta / std::sqrt(1 - zeta * zeta)); }
};

class FigureSecondOrder : public ::testing::TestWithParam<double> {};

TEST_P(FigureSecondOrder, OvershootPeakRingAndDampingMatchClosedForms) {
  const SecondOrder so{GetParam()};
  const Analytic tr = so.trajectory();
  // Overshoot = exp(-pi zeta/sqrt(1-zeta^2)) (Ogata, Modern Control Engineering; from memory).
  EXPECT_NEAR(value_of(tr, call("overshoot")), so.overshoot(), 1e-9);
  // Peak between samples (9.7 samples per ring period): 1 + Mp at tp = pi/wd (Ogata).
  EXPECT_NEAR(value_of(tr, call("max")), 1 + so.overshoot(), 1e-9 * (1 + so.overshoot()));
  EXPECT_NEAR(value_of(tr, call("tmax")), kPi / so.wd(), 1e-9 * kPi / so.wd());
  // Undershoot: the first minimum after the first crossing of final, at 2 pi/wd, lies Mp^2
  // below final (same closed form, n = 2).
  EXPECT_NEAR(value_of(tr, call("undershoot")), so.overshoot() * so.overshoot(), 1e-9);
  // Crossings of final are pi/wd apart: ringfreq = wd/(2 pi) (same closed form).
  EXPECT_NEAR(value_of(tr, call("ringfreq")), so.wd() / (2 * kPi), 1e-9 * so.wd() / (2 * kPi));
  // Logarithmic decrement of successive same-sign extrema gives back zeta (Thomson,
  // Theory of Vibration with Applications, log decrement; from memory).
  EXPECT_NEAR(value_of(tr, call("damping")), so.zeta, 1e-9);
  // final and initial of the run (closed form at 40 time constants: 1 to e^-40).
  EXPECT_NEAR(value_of(tr, call("final")), 1.0, 1e-15);
  EXPECT_NEAR(value_of(tr, call("min")), 0.0, 1e-15);  // y(0) = 0 is the minimum
}

INSTANTIATE_TEST_SUITE_P(FigureZeta, FigureSecondOrder, ::testing::Values(0.1, 0.3, 0.7));

TEST(FigureSecondOrderWindow, WindowMaxEqualsClosedFormInsideIt) {
  const SecondOrder so{0.1};
  const Analytic tr = so.trajectory();
  const double td = so.ring_period();
  // Window around the second maximum (t = 3 pi/wd = 1.5 td): excursion Mp^3 (Ogata).
  auto c = call("max", "out", {{"from", 1.2 * td}, {"to", 1.8 * td}});
  EXPECT_NEAR(value_of(tr, c), 1 + std::pow(so.overshoot(), 3), 1e-9);
  c.function = "tmax";
  EXPECT_NEAR(value_of(tr, c), 1.5 * td, 1e-9 * td);
  // A window that excludes every interior maximum: max is at its end (rising part,
  // from 0.05 td to 0.4 td, before tp = 0.5 td); max includes the window's ends.
  c = call("max", "out", {{"from", 0.05 * td}, {"to", 0.4 * td}});
  const double t_end = 0.4 * td, z = so.zeta, w = so.w0, d = so.wd();
  const double y_end =
      1 - std::exp(-z * w * t_end) * (std::cos(d * t_end) + z / std::sqrt(1 - z * z) * std::sin(d * t_end));
  EXPECT_NEAR(value_of(tr, c), y_end, 1e-14);
}

TEST(FigureSecondOrderCoarse, TenSamplesPerPeriodWithTheBracketStepUseTheSamplesAlone) {
  // Exactly 10 samples per ring period and bracket_step = period / 10: one subinterval per
  // sample interval (the grid resolves the ringing), and the peak, found by Brent's method
  // between the samples, is still 1 + Mp at tp = pi / wd (Ogata, Modern Control Engineering;
  // from memory), to 1e-9.
  const SecondOrder so{0.15};
  const double z = so.zeta, w = so.w0, d = so.wd(), k = z / std::sqrt(1 - z * z);
  const double period = so.ring_period();
  const Analytic tr(
      40 / (z * w), period / 10,  // 40 time constants: final is 1 to e^-40
      {[=](double t) { return 1 - std::exp(-z * w * t) * (std::cos(d * t) + k * std::sin(d * t)); }},
      {[=](double t) { return w / std::sqrt(1 - z * z) * std::exp(-z * w * t) * std::sin(d * t); }},
      {}, period / 10);
  EXPECT_NEAR(value_of(tr, call("max")), 1 + so.overshoot(), 1e-9);
  EXPECT_NEAR(value_of(tr, call("tmax")), kPi / d, 1e-9 * kPi / d);
  EXPECT_NEAR(value_of(tr, call("ringfreq")), d / (2 * kPi), 1e-9 * d);
}

// First-order step y = 1 - exp(-t/tau).
Analytic first_order(double tau) {
  return Analytic(40 * tau, tau / 3.3, {[=](double t) { return 1 - std::exp(-t / tau); }},
                  {[=](double t) { return std::exp(-t / tau) / tau; }});
}

TEST(FigureFirstOrder, RiseSettleAndNoRinging) {
  const double tau = 2.2e-6;
  const Analytic tr = first_order(tau);
  // 10-90 % rise = tau ln 9; 2 % settling = tau ln 50 (closed form: solve 1 - e^{-t/tau} = x).
  EXPECT_NEAR(value_of(tr, call("rise")), tau * std::log(9.0), 1e-12 * tau);
  EXPECT_NEAR(value_of(tr, call("settle")), tau * std::log(50.0), 1e-12 * tau);
  // 20-80 % rise = tau ln 4 and 5 % settling = tau ln 20 (same closed form).
  EXPECT_NEAR(value_of(tr, call("rise", "out", {{"lo", 0.2}, {"hi", 0.8}})), tau * std::log(4.0),
              1e-12 * tau);
  EXPECT_NEAR(value_of(tr, call("settle", "out", {{"band", 0.05}})), tau * std::log(20.0),
              1e-12 * tau);
  // Monotone: no overshoot, no undershoot; it never crosses final (closed form).
  EXPECT_EQ(value_of(tr, call("overshoot")), 0.0);
  EXPECT_EQ(value_of(tr, call("undershoot")), 0.0);
  FigureValue r = eval(tr, call("ringfreq"));
  EXPECT_TRUE(r.ok);
  EXPECT_EQ(r.value, 0.0);
  EXPECT_EQ(r.note, "does not ring");
  r = eval(tr, call("damping"));
  EXPECT_EQ(r.value, 1.0);
  EXPECT_EQ(r.note, "does not ring");
  // Largest slope is at t = 0: 1/tau (derivative of the closed form).
  EXPECT_NEAR(value_of(tr, call("slope")), 1 / tau, 1e-12 / tau);
  // Integral over [0, T]: T - tau (1 - e^{-T/tau}) (closed form); mean = integral / T.
  const double T = 40 * tau, integral = T - tau * (1 - std::exp(-40.0));
  EXPECT_NEAR(value_of(tr, call("integral")), integral, 1e-12 * integral);
  EXPECT_NEAR(value_of(tr, call("mean")), integral / T, 1e-12);
  // A window later in the run: the settle time is measured from `from`
  // (1 - e^{-t/tau} from t0 = tau: step (e^-1 - e^-40), band reached tau ln 50 after t0).
  EXPECT_NEAR(value_of(tr, call("settle", "out", {{"from", tau}})), tau * std::log(50.0),
              1e-9 * tau);
}

TEST(FigureFirstOrder, UnitsFollowTheFigure) {
  const Analytic tr = first_order(1e-3);
  EXPECT_EQ(eval(tr, call("rise")).unit, Dimension::second());
  EXPECT_EQ(eval(tr, call("max")).unit, Dimension::volt());
  EXPECT_EQ(eval(tr, call("integral")).unit, Dimension::volt() * Dimension::second());
  EXPECT_EQ(eval(tr, call("slope")).unit, Dimension::volt() / Dimension::second());
  EXPECT_EQ(eval(tr, call("overshoot")).unit, Dimension::none());
  EXPECT_EQ(eval(tr, call("ringfreq")).unit, Dimension::hertz());
  auto c = call("max");
  c.unit = Dimension::ampere();  // the parser's unit wins when set
  EXPECT_EQ(eval(tr, c).unit, Dimension::ampere());
}

// amp sin(2 pi f t).
Analytic sine(double amp, double f, double periods, double samples_per_period, double bracket = 0) {
  const double w = 2 * kPi * f;
  return Analytic(periods / f, 1 / (f * samples_per_period),
                  {[=](double t) { return amp * std::sin(w * t); }},
                  {[=](double t) { return amp * w * std::cos(w * t); }}, {}, bracket);
}

TEST(FigureSine, RmsMeanPeakSlopeAndCrossings) {
  const double amp = 325, f = 50, P = 1 / f;
  const Analytic tr = sine(amp, f, 3, 7.3);
  // RMS of a sine = amp/sqrt(2) over whole periods (closed form); mean = 0.
  EXPECT_NEAR(value_of(tr, call("rms")), amp / std::sqrt(2.0), 1e-9 * amp);
  EXPECT_NEAR(value_of(tr, call("mean")), 0.0, 1e-12 * amp);
  EXPECT_NEAR(value_of(tr, call("peak")), amp, 1e-12 * amp);
  EXPECT_NEAR(value_of(tr, call("pp")), 2 * amp, 1e-12 * amp);
  EXPECT_NEAR(value_of(tr, call("tmin")), 0.75 * P, 1e-12 * P);
  // Largest |dS/dt| = amp w, here inside a window that excludes the ends' maxima: at P/2.
  EXPECT_NEAR(value_of(tr, call("slope", "out", {{"from", 0.1 * P}, {"to", 0.9 * P}})),
              amp * 2 * kPi * f, 1e-9 * amp * 2 * kPi * f);
  // Crossings of 0 at k P/2; t = 0 is the window's end, so it is not one (NETLIST.md).
  auto w = call("when", "out", {{"level", 0}});
  EXPECT_NEAR(value_of(tr, w), 0.5 * P, 1e-13 * 3 * P);
  w.edge = "up";
  EXPECT_NEAR(value_of(tr, w), 1.0 * P, 1e-13 * 3 * P);
  w.args["nth"] = 2;
  EXPECT_NEAR(value_of(tr, w), 2.0 * P, 1e-13 * 3 * P);
  w.args["nth"] = 3;  // the third upward crossing would be t = 3P, the run's end: none
  FigureValue r = eval(tr, w);
  EXPECT_FALSE(r.ok);
  EXPECT_NE(r.error.find("out crosses"), std::string::npos) << r.error;
  // Level 0.5 amp upward: asin(0.5) = pi/6, so t = P/12, then P + P/12 (closed form).
  w = call("when", "out", {{"level", 0.5 * amp}, {"nth", 2}});
  w.edge = "up";
  EXPECT_NEAR(value_of(tr, w), P + P / 12, 1e-12 * P);
  w.edge = "down";
  w.args["nth"] = 1;
  EXPECT_NEAR(value_of(tr, w), P / 2 - P / 12, 1e-12 * P);
  // at(): the closed form at any instant.
  EXPECT_NEAR(value_of(tr, call("at", "out", {{"t", 0.123 * P}})), amp * std::sin(2 * kPi * 0.123),
              1e-12 * amp);
}

TEST(FigureSine, StepZeroIsAnErrorNamingTheSignal) {
  const Analytic tr = sine(1, 1, 1, 10);  // sin ends the window where it starts
  for (const char* f : {"overshoot", "undershoot", "rise", "settle"}) {
    const FigureValue r = eval(tr, call(f, "vsense"));
    EXPECT_FALSE(r.ok) << f;
    EXPECT_NE(r.error.find("step = 0"), std::string::npos) << r.error;
    EXPECT_NE(r.error.find("vsense"), std::string::npos) << r.error;
  }
}

TEST(FigureSine, RingingFasterThanTheGridIsFoundWithTheBracketStep) {
  // 0.27 samples per period: the grid alone aliases; the engine's bracket step (a tenth of
  // the ring period) lets max find the true crest amp (closed form).
  const double f = 10;
  const Analytic tr = sine(2.0, f, 5, 0.27, 0.1 / f);
  EXPECT_NEAR(value_of(tr, call("max")), 2.0, 1e-12);
  EXPECT_NEAR(value_of(tr, call("min")), -2.0, 1e-12);
  EXPECT_NEAR(value_of(tr, call("ringfreq")), f, 1e-9 * f);
}

// Rectangular pulse train: `high` for the first D*P of each period P, else 0, for 10
// periods; corners at k P and (k + D) P; at a corner the value is the right limit.
struct PulseTrain {
  double high = 5, P = 1e-3, D = 0.3;
  int periods = 10;
  std::vector<double> corners() const {
    std::vector<double> c;
    for (int k = 0; k < periods; ++k) {
      if (k > 0) c.push_back(k * P);
      c.push_back((k + D) * P);
    }
    return c;
  }
  Analytic trajectory() const {
    const auto cs = corners();
    const double h = high;
    return Analytic(periods * P, P / 7.1,
                    {[cs, h](double t) {
                      const auto n = std::upper_bound(cs.begin(), cs.end(), t) - cs.begin();
                      return n % 2 == 0 ? h : 0.0;
                    }},
                    {[](double) { return 0.0; }}, cs);
  }
};

TEST(FigurePulseTrain, MeanRmsJumpsAndTies) {
  const PulseTrain p;
  const Analytic tr = p.trajectory();
  // Duty D: mean = D high, RMS = sqrt(D) high (closed form).
  EXPECT_NEAR(value_of(tr, call("mean")), p.D * p.high, 1e-12 * p.high);
  EXPECT_NEAR(value_of(tr, call("rms")), std::sqrt(p.D) * p.high, 1e-12 * p.high);
  EXPECT_NEAR(value_of(tr, call("integral")), p.D * p.high * p.periods * p.P, 1e-12 * p.high * p.P);
  // Slope between corners is 0; the jumps are a note with their size (NETLIST.md).
  const FigureValue s = eval(tr, call("slope"));
  EXPECT_TRUE(s.ok);
  EXPECT_EQ(s.value, 0.0);
  EXPECT_NE(s.note.find("jumps by"), std::string::npos) << s.note;
  EXPECT_NE(s.note.find("5 V"), std::string::npos) << s.note;
  // Ties: every pulse is equally high; tmax is the earliest. From 0.5 P the first high
  // instant is the rising corner at P (right limit).
  EXPECT_EQ(value_of(tr, call("tmax")), 0.0);
  EXPECT_NEAR(value_of(tr, call("tmax", "out", {{"from", 0.5 * p.P}})), p.P, 1e-15);
  EXPECT_NEAR(value_of(tr, call("tmin")), p.D * p.P, 1e-15);
  // Crossings by a jump happen at the corner: falling edges at (k + D) P.
  auto w = call("when", "out", {{"level", 2.5}, {"nth", 2}});
  w.edge = "down";
  EXPECT_NEAR(value_of(tr, w), (1 + p.D) * p.P, 1e-15);
  // An ideal step's rise time is 0: both levels are crossed at the corner.
  EXPECT_EQ(value_of(tr, call("rise", "out", {{"from", 0.5 * p.P}, {"to", 1.2 * p.P}})), 0.0);
}

// RC charging from a V step: resistor voltage v = V e^{-t/tau}, current i = v/R.
// Energy dissipated in R over the whole charge = C V^2 / 2, independent of R (physics:
// the source delivers C V^2, the capacitor keeps C V^2 / 2).
TEST(FigureEnergy, ResistorChargingACapacitorDissipatesHalfCV2) {
  const double V = 24, R = 47, C = 2.2e-6, tau = R * C, T = 40 * tau;
  const Analytic tr(T, tau / 2.7,
                    {[=](double t) { return V * std::exp(-t / tau); },
                     [=](double t) { return V / R * std::exp(-t / tau); }},
                    {[=](double t) { return -V / tau * std::exp(-t / tau); },
                     [=](double t) { return -V / (R * tau) * std::exp(-t / tau); }});
  FigureCall e;
  e.function = "energy";
  e.text = "energy(R1)";
  e.part = 0;
  const FigureValue r = evaluate_figure(e, tr, 0, std::make_pair<std::size_t, std::size_t>(0, 1));
  ASSERT_TRUE(r.ok) << r.error;
  EXPECT_NEAR(r.value, C * V * V / 2, 1e-9 * C * V * V / 2);  // physics, e^-80 neglected
  EXPECT_EQ(r.unit, Dimension::joule());
  e.function = "power";
  const FigureValue pw = evaluate_figure(e, tr, 0, std::make_pair<std::size_t, std::size_t>(0, 1));
  EXPECT_NEAR(pw.value, C * V * V / 2 / T, 1e-9 * C * V * V / 2 / T);  // mean over the run
  // Without the part's signals: an error, not a number.
  EXPECT_FALSE(evaluate_figure(e, tr, 0, std::nullopt).ok);
}

TEST(FigureErrors, WindowsAndArguments) {
  const Analytic tr = first_order(1.0);
  EXPECT_FALSE(eval(tr, call("max", "out", {{"from", -1}})).ok);
  EXPECT_FALSE(eval(tr, call("max", "out", {{"to", 41}})).ok);
  EXPECT_FALSE(eval(tr, call("max", "out", {{"from", 3}, {"to", 2}})).ok);
  EXPECT_FALSE(eval(tr, call("rise", "out", {{"lo", 0.9}, {"hi", 0.1}})).ok);
  EXPECT_FALSE(eval(tr, call("when", "out", {{"level", 0.5}, {"nth", 1.5}})).ok);
  EXPECT_FALSE(eval(tr, call("when", "out")).ok);  // no level
  EXPECT_FALSE(eval(tr, call("at", "out")).ok);    // no instant
  EXPECT_FALSE(eval(tr, call("at", "out", {{"t", 100}})).ok);
  EXPECT_FALSE(eval(tr, call("median")).ok);
  // 1 - e^{-t} never reaches 2: when() is an error naming the signal.
  const FigureValue r = eval(tr, call("when", "out", {{"level", 2}}));
  EXPECT_FALSE(r.ok);
  EXPECT_NE(r.error.find("when(out)"), std::string::npos) << r.error;
  // Rise to 100 % is never reached inside the window (final is reached only at its end).
  EXPECT_FALSE(eval(tr, call("rise", "out", {{"hi", 1.0}})).ok);
}

TEST(FigureExpect, Comparisons) {
  Expect e;
  e.value = 10;
  e.op = CompareOp::Less;
  EXPECT_TRUE(expect_holds(e, 9.99));
  EXPECT_FALSE(expect_holds(e, 10));
  e.op = CompareOp::LessEqual;
  EXPECT_TRUE(expect_holds(e, 10));
  e.op = CompareOp::Greater;
  EXPECT_FALSE(expect_holds(e, 10));
  EXPECT_TRUE(expect_holds(e, 10.01));
  e.op = CompareOp::GreaterEqual;
  EXPECT_TRUE(expect_holds(e, 10));
  EXPECT_FALSE(expect_holds(e, std::nan("")));
  e.op = CompareOp::Equal;
  e.within = 0.05;  // 5 %: relative to VALUE (NETLIST.md `within`)
  e.within_relative = true;
  EXPECT_TRUE(expect_holds(e, 10.49));
  EXPECT_FALSE(expect_holds(e, 10.51));
  e.within_relative = false;  // absolute 0.05 in the value's unit
  EXPECT_TRUE(expect_holds(e, 10.04));
  EXPECT_FALSE(expect_holds(e, 10.06));
  e.within.reset();
  EXPECT_TRUE(expect_holds(e, 10));
  EXPECT_FALSE(expect_holds(e, 10.0000001));
}

}  // namespace
