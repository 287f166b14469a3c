// Frequency analysis (solver/frequency.hpp) against closed forms: the RC
// low-pass, Butterworth LC ladders of order 3 and 5, phase unwrapping, the
// point grid of NETLIST.md section 7, and the rejection of non-linear
// signals. Circuits are written as .rlc text and loaded by the parser.
#include "solver/frequency.hpp"

#include <gtest/gtest.h>

#include <algorithm>
#include <cmath>
#include <complex>
#include <cstdio>
#include <string>
#include <vector>

#include "parser/load.hpp"

namespace {

using ringdown::Circuit;
using ringdown::Diagnostics;
using ringdown::load_text;
using ringdown::solver::FrequencyOptions;
using ringdown::solver::FrequencyResponse;
using ringdown::solver::FrequencyResult;
using ringdown::solver::run_frequency;
using ringdown::solver::Status;

constexpr double kPi = 3.14159265358979323846;

Circuit load(const std::string& text) {
  auto r = load_text(text, "test.rlc");
  std::string messages;
  for (const auto& d : r.diagnostics) messages += ringdown::render(d);
  EXPECT_TRUE(r.ok()) << messages;
  return r.ok() ? *r.circuit : Circuit{};
}

FrequencyOptions options_of(const Circuit& c) {
  FrequencyOptions o;
  o.from = c.frequency->from;
  o.to = c.frequency->to;
  o.per_decade = c.frequency->per_decade;
  o.input_part = c.frequency->input_part;
  return o;
}

// --- RC low-pass -----------------------------------------------------------------

constexpr const char* kRc = R"(title "RC low-pass"
voltage   V1 in  gnd  1V
resistor  R1 in  out  1k
capacitor C1 out gnd  1n
frequency from=1kHz to=90MHz per_decade=10 input=V1
record    out, C1.i
)";

TEST(FrequencyRc, MagnitudeAndPhaseMatchClosedForm) {
  const Circuit c = load(kRc);
  Diagnostics d;
  const FrequencyResult r = run_frequency(c, c.records, options_of(c), d);
  ASSERT_EQ(r.status, Status::Ok);
  // 10 per decade from 1 kHz, last point not above 90 MHz: 1k .. 10^(49/10) k.
  ASSERT_EQ(r.freq.size(), 50u);
  const double rc = 1e3 * 1e-9;
  for (std::size_t i = 0; i < r.freq.size(); ++i) {
    const double w = 2 * kPi * r.freq[i];
    // H = 1/(1 + j w RC): |H| = 1/sqrt(1 + (wRC)^2), phase -atan(wRC)
    // (first-order low-pass, closed form; any circuits text).
    const double mag = 1 / std::sqrt(1 + (w * rc) * (w * rc));
    const double got_mag = std::pow(10.0, r.signals[0].db[i] / 20);
    EXPECT_NEAR(got_mag / mag, 1.0, 1e-10) << r.freq[i];
    EXPECT_NEAR(r.signals[0].deg[i] * kPi / 180, -std::atan(w * rc), 1e-10) << r.freq[i];
    // The capacitor current per volt of input: I = j w C / (1 + j w RC)
    // (same closed form, Ohm's law on the series circuit).
    const std::complex<double> i_c = std::complex<double>(0, w * 1e-9) / std::complex<double>(1, w * rc);
    const double got_i = std::pow(10.0, r.signals[1].db[i] / 20);
    EXPECT_NEAR(got_i / std::abs(i_c), 1.0, 1e-10) << r.freq[i];
    EXPECT_NEAR(r.signals[1].deg[i] * kPi / 180, std::arg(i_c), 1e-10) << r.freq[i];
  }
  // Figures: DC gain 0 dB; corner at 1/(2 pi RC) (closed form above).
  const auto& f = r.signals[0].figures;
  EXPECT_FALSE(f.dc_at_lowest);
  EXPECT_NEAR(f.dc_gain_db, 0.0, 1e-12);
  ASSERT_TRUE(f.corner_hz.has_value());
  EXPECT_NEAR(*f.corner_hz / (1 / (2 * kPi * rc)), 1.0, 1e-9);
  // A low-pass peaks at its lowest frequency (monotone |H|).
  EXPECT_NEAR(f.peak_hz, 1e3, 1e-6);
}

TEST(FrequencyRc, ExactResponseAtAnyFrequency) {
  const Circuit c = load(kRc);
  Diagnostics d;
  auto resp = FrequencyResponse::build(c, c.records, c.frequency->input_part, false, d);
  ASSERT_TRUE(resp.has_value());
  std::vector<std::complex<double>> h;
  for (double f : {0.0, 1.0, 12345.678, 159154.943, 3.3e7}) {
    ASSERT_TRUE(resp->at(f, h));
    // 1/(1 + j w RC) (closed form, any circuits text).
    const std::complex<double> want = 1.0 / std::complex<double>(1, 2 * kPi * f * 1e-6);
    EXPECT_LT(std::abs(h[0] - want), 1e-12) << f;
  }
}

TEST(FrequencyRc, PhaseAtFollowsTheSweepBranch) {
  const Circuit c = load(kRc);
  FrequencyOptions o = options_of(c);
  o.phase_at = 1 / (2 * kPi * 1e-6);
  Diagnostics d;
  const FrequencyResult r = run_frequency(c, c.records, o, d);
  ASSERT_EQ(r.status, Status::Ok);
  ASSERT_TRUE(r.signals[0].figures.phase_at_deg.has_value());
  // -atan(1) = -45 deg at the corner (closed form).
  EXPECT_NEAR(*r.signals[0].figures.phase_at_deg, -45.0, 1e-9);
}

// --- Butterworth ladders -----------------------------------------------------------

// Doubly terminated LC ladder, shunt C first, with the Butterworth prototype
// values g_k = 2 sin((2k-1) pi / (2n)) (Butterworth 1930; tabulated in
// Zverev, Handbook of Filter Synthesis, 1967), scaled to fc between Rterm
// terminations: C = g / (2 pi fc Rterm), L = g Rterm / (2 pi fc).
std::string butterworth(int n) {
  std::string t = "title \"Butterworth n=" + std::to_string(n) + "\"\nfc = 100kHz\nRterm = 50Ohm\n";
  t += "voltage Vs src gnd 1V\nresistor Rs src n0 Rterm\n";
  int node = 0;
  const int inductors = n / 2;
  auto name = [&](int k) { return k == inductors ? std::string("out") : "n" + std::to_string(k); };
  char g[64];
  for (int k = 1; k <= n; ++k) {
    std::snprintf(g, sizeof g, "%.17f", 2 * std::sin((2 * k - 1) * kPi / (2 * n)));
    if (k % 2 == 1) {
      t += "capacitor C" + std::to_string(k) + " " + name(node) + " gnd (" + g + "/(2*pi*fc*Rterm))\n";
    } else {
      t += "inductor L" + std::to_string(k) + " " + name(node) + " " + name(node + 1) + " (" + g +
           "*Rterm/(2*pi*fc))\n";
      ++node;
    }
  }
  t += "resistor RL out gnd Rterm\n";
  t += "frequency from=1kHz to=100MHz per_decade=100 input=Vs\nrecord out\n";
  return t;
}

class FrequencyButterworth : public ::testing::TestWithParam<int> {};

TEST_P(FrequencyButterworth, CornerSlopeAndPhase) {
  const int n = GetParam();
  const Circuit c = load(butterworth(n));
  ASSERT_TRUE(c.frequency.has_value());
  Diagnostics d;
  const FrequencyResult r = run_frequency(c, c.records, options_of(c), d);
  ASSERT_EQ(r.status, Status::Ok);
  const auto& s = r.signals[0];
  auto index_of = [&](double f) {
    for (std::size_t i = 0; i < r.freq.size(); ++i)
      if (std::fabs(r.freq[i] / f - 1) < 1e-9) return i;
    ADD_FAILURE() << "no point at " << f;
    return std::size_t{0};
  };
  // Equal terminations halve the source: DC gain 20 log10(1/2) = -6.0206 dB
  // (voltage divider, Ohm's law).
  EXPECT_NEAR(s.figures.dc_gain_db, 20 * std::log10(0.5), 1e-9);
  // |H/H(0)|^2 = 1/(1 + (f/fc)^(2n)) (Butterworth 1930): -3.0103 dB at fc.
  const std::size_t ic = index_of(100e3);
  EXPECT_NEAR(s.db[ic] - s.figures.dc_gain_db, -3.0103, 0.01);
  ASSERT_TRUE(s.figures.corner_hz.has_value());
  EXPECT_NEAR(*s.figures.corner_hz / 100e3, 1.0, 1e-4);
  // Well above fc the gain falls 20 n dB per decade (same formula).
  const double slope = s.db[index_of(10e6)] - s.db[index_of(1e6)];
  EXPECT_NEAR(slope, -20.0 * n, 0.5);
  // Peak of a Butterworth response is its DC gain (maximally flat).
  EXPECT_NEAR(s.figures.peak_db, s.figures.dc_gain_db, 1e-6);
  // Phase: first point in (-180, 180], continuous (no 360 jumps), and
  // tending to -90 n deg far above fc (n poles, no finite zeros: an
  // all-pole low-pass of order n; any circuits text).
  EXPECT_GT(s.deg.front(), -180.0);
  EXPECT_LE(s.deg.front(), 180.0);
  for (std::size_t i = 1; i < s.deg.size(); ++i)
    EXPECT_LT(std::fabs(s.deg[i] - s.deg[i - 1]), 30.0) << r.freq[i];
  EXPECT_NEAR(s.deg.back(), -90.0 * n, 1.0);
  // At fc the phase is -45 n deg: the poles lie on the unit circle placed
  // symmetrically about the real axis, each pair contributing -90 deg at
  // p = j (from memory); e.g. n = 3, H = 1/((p+1)(p^2+p+1)) at p = j gives
  // -(45 + 90) = -135 deg (closed form).
  EXPECT_NEAR(s.deg[ic], -45.0 * n, 1e-6);
}

INSTANTIATE_TEST_SUITE_P(Orders, FrequencyButterworth, ::testing::Values(3, 5));

// --- Chebyshev ladder ----------------------------------------------------------------

// Doubly terminated Chebyshev low-pass, 0.5 dB ripple, odd order (equal terminations), shunt C
// first, the prototype values from the closed-form recursion (Matthaei, Young & Jones,
// Microwave Filters, Impedance-Matching Networks and Coupling Structures, 1964, sec. 4.05;
// from memory): beta = ln(coth(Lr / 17.37)), gamma = sinh(beta / 2n),
// a_k = sin((2k-1) pi / 2n), b_k = gamma^2 + sin^2(k pi / n), g_1 = 2 a_1 / gamma,
// g_k = 4 a_(k-1) a_k / (b_(k-1) g_(k-1)). For n = 3 that gives 1.5963, 1.0967, 1.5963, the
// handbook table's values (from memory). Scaled to the ripple band edge fc = 100 kHz.
std::vector<double> chebyshev_g(int n, double ripple_db) {
  const double beta = std::log(1 / std::tanh(ripple_db / 17.37));
  const double gamma = std::sinh(beta / (2 * n));
  std::vector<double> a(n + 1), b(n + 1), g(n + 1);
  for (int k = 1; k <= n; ++k) {
    a[k] = std::sin((2 * k - 1) * kPi / (2 * n));
    b[k] = gamma * gamma + std::pow(std::sin(k * kPi / n), 2);
  }
  g[1] = 2 * a[1] / gamma;
  for (int k = 2; k <= n; ++k) g[k] = 4 * a[k - 1] * a[k] / (b[k - 1] * g[k - 1]);
  return g;
}

TEST(FrequencyChebyshev, PassbandRippleIsHalfADecibel) {
  for (int n : {3, 5}) {
    const std::vector<double> g = chebyshev_g(n, 0.5);
    if (n == 3) {
      EXPECT_NEAR(g[1], 1.5963, 1e-4);
      EXPECT_NEAR(g[2], 1.0967, 1e-4);
    }
    std::string t = "fc = 100kHz\nRterm = 50Ohm\nvoltage Vs src gnd 1V\nresistor Rs src n0 Rterm\n";
    int node = 0;
    const int inductors = n / 2;
    auto name = [&](int k) { return k == inductors ? std::string("out") : "n" + std::to_string(k); };
    char v[64];
    for (int k = 1; k <= n; ++k) {
      std::snprintf(v, sizeof v, "%.17f", g[static_cast<std::size_t>(k)]);
      if (k % 2 == 1) {
        t += "capacitor C" + std::to_string(k) + " " + name(node) + " gnd (" + v + "/(2*pi*fc*Rterm))\n";
      } else {
        t += "inductor L" + std::to_string(k) + " " + name(node) + " " + name(node + 1) + " (" + v +
             "*Rterm/(2*pi*fc))\n";
        ++node;
      }
    }
    t += "resistor RL out gnd Rterm\nfrequency from=1kHz to=100kHz per_decade=2000 input=Vs\nrecord out\n";
    const Circuit c = load(t);
    ASSERT_TRUE(c.frequency.has_value());
    Diagnostics d;
    const FrequencyResult r = run_frequency(c, c.records, options_of(c), d);
    ASSERT_EQ(r.status, Status::Ok);
    const auto& db = r.signals[0].db;
    const double hi = *std::max_element(db.begin(), db.end());
    const double lo = *std::min_element(db.begin(), db.end());
    // Odd order, equal terminations: the passband touches the divider's -6.0206 dB (full power
    // transfer) and dips by the ripple, 0.5 dB, reached again at the band edge (Chebyshev
    // equiripple response, same source).
    EXPECT_NEAR(hi, 20 * std::log10(0.5), 1e-4) << "n = " << n;
    EXPECT_NEAR(hi - lo, 0.5, 0.01) << "n = " << n;
    EXPECT_NEAR(db.back(), 20 * std::log10(0.5) - 0.5, 0.01) << "n = " << n;
  }
}

// --- Grid, unwrapping, rejections -----------------------------------------------

TEST(FrequencyPoints, EndsOnTheLastPointNotAboveTo) {
  // NETLIST.md section 7: from * 10^(k/per_decade) up to the last not above to.
  auto p = ringdown::solver::frequency_points(1.0, 1e6, 10);
  ASSERT_EQ(p.size(), 61u);
  EXPECT_DOUBLE_EQ(p.front(), 1.0);
  EXPECT_NEAR(p.back(), 1e6, 1e-6);
  p = ringdown::solver::frequency_points(10.0, 95.0, 1);
  ASSERT_EQ(p.size(), 1u);
  p = ringdown::solver::frequency_points(10.0, 100.0, 3);
  ASSERT_EQ(p.size(), 4u);
  EXPECT_NEAR(p[1], 10 * std::pow(10.0, 1.0 / 3), 1e-12);
}

TEST(FrequencyUnwrap, RemovesTurnsAndMapsTheFirstPoint) {
  // Common practice, no source: successive differences kept within 180 deg.
  std::vector<double> d{-180.0, 170.0, 100.0, -10.0, -170.0, 170.0};
  ringdown::solver::unwrap_degrees(d);
  EXPECT_DOUBLE_EQ(d[0], 180.0);  // -180 is outside (-180, 180]
  EXPECT_DOUBLE_EQ(d[1], 170.0);
  EXPECT_DOUBLE_EQ(d[3], -10.0);
  EXPECT_DOUBLE_EQ(d[4], -170.0);
  EXPECT_DOUBLE_EQ(d[5], -190.0);
}

TEST(FrequencyReject, PowerSignalIsNotLinear) {
  const Circuit c = load(R"(voltage V1 in gnd 1V
resistor R1 in out 1k
capacitor C1 out gnd 1n
frequency from=1kHz to=1MHz input=V1
record out, R1.p
)");
  Diagnostics d;
  const FrequencyResult r = run_frequency(c, c.records, options_of(c), d);
  EXPECT_EQ(r.status, Status::BadInput);
  ASSERT_FALSE(d.empty());
  EXPECT_NE(d.back().message.find("R1.p"), std::string::npos) << d.back().message;
  EXPECT_NE(d.back().message.find("power"), std::string::npos) << d.back().message;
}

TEST(FrequencyReject, ProductOfSignalsIsNotLinearButScalingIs) {
  const Circuit c = load(R"(voltage V1 in gnd 1V
resistor R1 in out 1k
resistor R2 out gnd 1k
frequency from=1kHz to=1MHz input=V1
record half = 2*out - in + 3, sq = out*in
)");
  Diagnostics d;
  EXPECT_FALSE(FrequencyResponse::build(c, c.records, c.frequency->input_part, false, d));
  ASSERT_FALSE(d.empty());
  EXPECT_NE(d.back().message.find("sq"), std::string::npos);
  // Without the product: 2*out - in + 3 responds 2*(1/2) - 1 = 0, and the
  // offset 3 has no small-signal part (linearity; divider by Ohm's law).
  std::vector<ringdown::Signal> linear{c.records[0]};
  Diagnostics d2;
  auto resp = FrequencyResponse::build(c, linear, c.frequency->input_part, false, d2);
  ASSERT_TRUE(resp.has_value());
  std::vector<std::complex<double>> h;
  ASSERT_TRUE(resp->at(1e3, h));
  EXPECT_LT(std::abs(h[0]), 1e-15);
}

TEST(FrequencyInput, OtherSourcesAreZeroed) {
  // Superposition (any circuits text): from V2 alone, with V1 shorted, the
  // divider R1 || R2 gives out/V2 = R1/(R1+R2) = 1/3 for R1 = 1k, R2 = 2k.
  const Circuit c = load(R"(voltage V1 a gnd 5V
voltage V2 b gnd 1V
current I1 out gnd 1mA
resistor R1 a out 1k
resistor R2 b out 2k
frequency from=1Hz to=10Hz input=V1
record out
)");
  Diagnostics d;
  FrequencyOptions o = options_of(c);
  o.input_part = c.find_part("V2");
  const FrequencyResult r = run_frequency(c, c.records, o, d);
  ASSERT_EQ(r.status, Status::Ok);
  EXPECT_NEAR(r.signals[0].db[0], 20 * std::log10(1.0 / 3), 1e-12);
  EXPECT_NEAR(r.signals[0].deg[0], 0.0, 1e-12);
  // From the current source: out = -I R1||R2 (it draws from out to gnd), so
  // 666.67 Ohm and 180 deg.
  o.input_part = c.find_part("I1");
  const FrequencyResult ri = run_frequency(c, c.records, o, d);
  ASSERT_EQ(ri.status, Status::Ok);
  EXPECT_NEAR(ri.signals[0].db[0], 20 * std::log10(2000.0 / 3), 1e-9);
  EXPECT_NEAR(ri.signals[0].deg[0], 180.0, 1e-9);
}

}  // namespace
