// The exact engine against laws rather than formulas: superposition of the
// zero-input and zero-state responses, time invariance, step-size
// independence, Tellegen's theorem, energy balance, a lossless LC's constant
// energy (VERIFICATION.md, "The variation-of-parameters formula itself" and
// "Physical laws").
// Also: a run with a kept MNA structure (the sweep runner's trials) equals a fresh one.
#include <gtest/gtest.h>

#include <cmath>
#include <memory>
#include <optional>
#include <string>
#include <utility>
#include <vector>

#include "circuit_builder.hpp"
#include "mna/descriptor.hpp"
#include "solver/transient.hpp"

namespace {

using ringdown::Diagnostics;
using ringdown::Quantity;
using ringdown::Severity;
using ringdown::Signal;
using ringdown::test::CircuitBuilder;
namespace solver = ringdown::solver;

using ringdown::test::run;

double peak(const std::vector<double>& v) {
  double p = 0;
  for (double x : v) p = std::max(p, std::abs(x));
  return p;
}

// A damped two-mesh network with a snubber, used by several laws below:
// V1 - R1 - L1 - a; C1 a-gnd; Rs-Cs snubber a-gnd; L2 a-b; R2 b-gnd.
struct TwoMesh {
  CircuitBuilder b;
  std::vector<int> parts;
  TwoMesh(ringdown::WaveformPtr source, std::optional<double> v0, std::optional<double> i0) {
    parts.push_back(b.voltage("V1", "in", "gnd", std::move(source)));
    parts.push_back(b.resistor("R1", "in", "m", 2.0));
    parts.push_back(b.inductor("L1", "m", "a", 10e-6, i0));
    parts.push_back(b.capacitor("C1", "a", "gnd", 1e-6, v0));
    parts.push_back(b.resistor("Rs", "a", "s", 4.7));
    parts.push_back(b.capacitor("Cs", "s", "gnd", 2.2e-6));
    parts.push_back(b.inductor("L2", "a", "bb", 22e-6));
    parts.push_back(b.resistor("R2", "bb", "gnd", 8.0));
  }
};

TEST(Laws, TotalResponseIsZeroInputPlusZeroState) {
  ringdown::PulseSpec p;
  p.high = 5;
  p.period = 37e-6;
  p.width = 11e-6;
  p.rise = 1e-6;
  p.fall = 2e-6;
  auto src = ringdown::make_pulse(p);
  TwoMesh total(src, 3.0, -0.4), zin(ringdown::make_constant(0), 3.0, -0.4),
      zst(src, std::nullopt, std::nullopt);
  auto sig = [](TwoMesh& t) {
    return std::vector<Signal>{t.b.v("a"), t.b.v("s"), t.b.q(t.parts[2], Quantity::Current),
                               t.b.q(t.parts[3], Quantity::Current)};
  };
  const auto a = run(total.b, sig(total), 300e-6, 0.5e-6, false);
  const auto b = run(zin.b, sig(zin), 300e-6, 0.5e-6, false);
  const auto c = run(zst.b, sig(zst), 300e-6, 0.5e-6, false);
  // Superposition of zero-input and zero-state responses (linearity of the
  // Duhamel formula; VERIFICATION.md): equal to rounding.
  for (std::size_t s = 0; s < a.values.size(); ++s) {
    const double pk = peak(a.values[s]);
    for (std::size_t k = 0; k < a.time.size(); ++k)
      ASSERT_NEAR(a.values[s][k], b.values[s][k] + c.values[s][k], 1e-12 * pk)
          << "signal " << s << " sample " << k;
  }
}

TEST(Laws, TimeInvariance) {
  // A step at 0 and the same step delayed by 40 samples: y_d(t + d) = y(t).
  const double h = 0.25e-6, d = 40 * h;
  TwoMesh now(ringdown::make_step(0, 2, 0, 0.3e-6), std::nullopt, std::nullopt);
  TwoMesh later(ringdown::make_step(0, 2, d, 0.3e-6), std::nullopt, std::nullopt);
  const auto a = run(now.b, {now.b.v("a"), now.b.v("bb")}, 100e-6, h);
  const auto b = run(later.b, {later.b.v("a"), later.b.v("bb")}, 100e-6 + d, h);
  // Time invariance of a constant-coefficient network (VERIFICATION.md).
  for (std::size_t s = 0; s < 2; ++s) {
    const double pk = peak(a.values[s]);
    for (std::size_t k = 0; k < a.time.size(); ++k)
      ASSERT_NEAR(a.values[s][k], b.values[s][k + 40], 1e-11 * pk) << "sample " << k;
  }
}

TEST(Laws, StepSizeIndependence) {
  // Output step h and h/7 agree at common instants to 1e-10 relative
  // (VERIFICATION.md; the exact formula does not depend on the step).
  ringdown::PulseSpec p;
  p.high = 5;
  p.period = 13e-6;
  p.width = 4e-6;
  p.rise = 0.5e-6;
  p.fall = 0.5e-6;
  TwoMesh t(ringdown::make_pulse(p), std::nullopt, std::nullopt);
  const double h = 0.7e-6;
  const auto a = run(t.b, {t.b.v("a"), t.b.v("s")}, 140e-6, h);
  const auto b = run(t.b, {t.b.v("a"), t.b.v("s")}, 140e-6, h / 7);
  ASSERT_EQ(b.time.size(), 7 * (a.time.size() - 1) + 1);
  for (std::size_t s = 0; s < 2; ++s) {
    const double pk = peak(a.values[s]);
    for (std::size_t k = 0; k < a.time.size(); ++k)
      ASSERT_NEAR(a.values[s][k], b.values[s][7 * k], 1e-10 * pk) << "sample " << k;
  }
}

TEST(Laws, TellegenAtEverySample) {
  ringdown::PulseSpec p;
  p.high = 5;
  p.period = 20e-6;
  p.width = 6e-6;
  p.rise = 1e-6;
  p.fall = 1e-6;
  TwoMesh t(ringdown::make_pulse(p), 1.0, 0.2);
  std::vector<Signal> power;
  for (int part : t.parts) power.push_back(t.b.q(part, Quantity::Power));
  const auto r = run(t.b, power, 100e-6, 0.1e-6, false);
  // Tellegen's theorem: the powers absorbed by all elements sum to zero at
  // every instant (Tellegen 1952; any circuit theory text).
  for (std::size_t k = 0; k < r.time.size(); ++k) {
    double sum = 0, size = 0;
    for (const auto& v : r.values) {
      sum += v[k];
      size += std::abs(v[k]);
    }
    ASSERT_LE(std::abs(sum), 1e-12 * size + 1e-300) << "t = " << r.time[k];
  }
}

// Composite Boole (5-point closed Newton-Cotes) rule on a uniform grid of
// 4j + 1 samples; error O(h^6 f^(6)) (Abramowitz & Stegun 25.4.14; from memory).
double boole(const std::vector<double>& f, double h) {
  double s = 0;
  for (std::size_t i = 0; i + 4 < f.size(); i += 4)
    s += 2 * h / 45 * (7 * f[i] + 32 * f[i + 1] + 12 * f[i + 2] + 32 * f[i + 3] + 7 * f[i + 4]);
  return s;
}

TEST(Laws, EnergyBalance) {
  // Smooth drive (no corners inside the window, so the quadrature sees a
  // smooth integrand): an approach() source from 0 to 6 V.
  TwoMesh t(ringdown::make_approach(6, 3e-6, 0, 0), std::nullopt, std::nullopt);
  std::vector<Signal> sig;
  for (int part : t.parts) sig.push_back(t.b.q(part, Quantity::Power));
  sig.push_back(t.b.q(t.parts[2], Quantity::Current));             // L1.i
  sig.push_back(t.b.q(t.parts[3], Quantity::CapacitanceVoltage));  // C1.vc
  sig.push_back(t.b.q(t.parts[5], Quantity::CapacitanceVoltage));  // Cs.vc
  sig.push_back(t.b.q(t.parts[6], Quantity::Current));             // L2.i
  const double T = 60e-6, h = T / 12000;
  const auto r = run(t.b, sig, T, h);
  // Energy balance (conservation of energy): source energy delivered
  // = resistor dissipation + change of stored energy C v^2/2 + L i^2/2.
  const double delivered = -boole(r.values[0], h);  // V1 absorbs -delivered
  const double dissipated = boole(r.values[1], h) + boole(r.values[4], h) + boole(r.values[7], h);
  auto stored = [&](std::size_t k) {
    const double iL1 = r.values[8][k], v1 = r.values[9][k], vs = r.values[10][k],
                 iL2 = r.values[11][k];
    return 0.5 * 10e-6 * iL1 * iL1 + 0.5 * 1e-6 * v1 * v1 + 0.5 * 2.2e-6 * vs * vs +
           0.5 * 22e-6 * iL2 * iL2;
  };
  const double change = stored(r.time.size() - 1) - stored(0);
  EXPECT_NEAR(delivered, dissipated + change, 1e-9 * delivered);
}

TEST(Laws, LosslessLcKeepsItsEnergy) {
  const double L = 3e-3, C = 5e-6;
  CircuitBuilder b;
  const int c1 = b.capacitor("C1", "a", "gnd", C, 2.0);
  const int l1 = b.inductor("L1", "a", "gnd", L, 0.05);
  const auto r = run(b, {b.q(c1, Quantity::CapacitanceVoltage), b.q(l1, Quantity::Current)},
                     50e-3, 3.7e-6, false);
  // Energy conservation of a lossless LC (any circuit theory text).
  const double e0 = 0.5 * C * 4.0 + 0.5 * L * 0.05 * 0.05;
  for (std::size_t k = 0; k < r.time.size(); ++k) {
    const double v = r.values[0][k], i = r.values[1][k];
    ASSERT_NEAR(0.5 * C * v * v + 0.5 * L * i * i, e0, 1e-11 * e0) << "t = " << r.time[k];
  }
}

TEST(Cost, PulseTrainReusesPropagators) {
  // 1,000 pulses, corners between samples: propagator builds stay bounded
  // (ARCHITECTURE.md step 4: no fresh dense expm per corner).
  ringdown::PulseSpec p;
  p.high = 1;
  p.period = 1e-6;
  p.width = 0.3e-6;
  p.rise = 0.05e-6;
  p.fall = 0.07e-6;
  p.count = 1000;
  TwoMesh t(ringdown::make_pulse(p), std::nullopt, std::nullopt);
  const auto r = run(t.b, {t.b.v("a")}, 1e-3, 0.1e-6);
  EXPECT_EQ(r.time.size(), 10001u);
  EXPECT_LT(r.summary.propagators_built, 64u);
}

}  // namespace

namespace {

TEST(Structure, AKeptStructureGivesTheRunOfTheNewValues) {
  // A trial's run with its point's MNA structure (TransientOptions::structure, analysed
  // from the nominal circuit) against the same trial analysed afresh: the structure does
  // not depend on values (mna/descriptor.hpp: "values are restamped"), so the samples are
  // the same bit for bit; and they are the new values' run, not the nominal one (the
  // network's peak current changes with R1, L1 and C1; common practice, no source).
  TwoMesh nominal(ringdown::make_step(0, 10, 1e-6, 0), std::nullopt, std::nullopt);
  ringdown::Circuit drawn = nominal.b.c;
  for (const auto& [part, factor] : {std::pair{1, 1.1}, std::pair{2, 0.93}, std::pair{3, 1.07}})
    drawn.elements[static_cast<std::size_t>(drawn.parts[static_cast<std::size_t>(nominal.parts[part])].main)].value *= factor;
  Diagnostics d0;
  std::optional<ringdown::mna::Network> net = ringdown::mna::Network::analyse(nominal.b.c, false, d0);
  ASSERT_TRUE(net.has_value());
  const std::vector<Signal> sig{nominal.b.v("a"), nominal.b.q(nominal.parts[2], Quantity::Current)};
  solver::TransientOptions opt;
  opt.until = 200e-6;
  opt.every = 0.5e-6;
  Diagnostics d1, d2, d3;
  const solver::SampledRun fresh = solver::run_transient_sampled(drawn, sig, opt, d1);
  const solver::SampledRun nominal_run = solver::run_transient_sampled(nominal.b.c, sig, opt, d3);
  opt.structure = std::make_shared<const ringdown::mna::Network>(std::move(*net));
  const solver::SampledRun kept = solver::run_transient_sampled(drawn, sig, opt, d2);
  ASSERT_EQ(fresh.summary.status, solver::Status::Ok);
  ASSERT_EQ(kept.summary.status, solver::Status::Ok);
  ASSERT_EQ(kept.values.size(), fresh.values.size());
  for (std::size_t s = 0; s < fresh.values.size(); ++s) {
    ASSERT_EQ(kept.values[s].size(), fresh.values[s].size());
    for (std::size_t k = 0; k < fresh.values[s].size(); ++k) EXPECT_EQ(kept.values[s][k], fresh.values[s][k]);
  }
  EXPECT_GT(std::abs(peak(kept.values[1]) - peak(nominal_run.values[1])), 1e-3 * peak(nominal_run.values[1]));
}

}  // namespace
