// Natural modes (solver/modes.hpp) against closed forms of first- and
// second-order circuits, participation factors against their definition,
// and the switch configurations a run meets.
#include "solver/modes.hpp"

#include <gtest/gtest.h>

#include <Eigen/Eigenvalues>
#include <algorithm>
#include <cmath>
#include <complex>
#include <limits>
#include <numbers>
#include <string>
#include <vector>

#include "parser/load.hpp"

namespace {

using namespace ringdown;
using solver::ModeKind;

constexpr double kTight = 1e-10;  // the relative accuracy issue 5 asks for

solver::ModesResult modes_of(const std::string& text) {
  LoadResult loaded = load_text(text, "modes_test.rlc");
  EXPECT_TRUE(loaded.ok()) << (loaded.diagnostics.empty() ? "" : render(loaded.diagnostics[0]));
  if (!loaded.ok()) return {};
  Diagnostics diags;
  solver::ModesResult r = solver::compute_modes(*loaded.circuit, {}, diags);
  EXPECT_TRUE(r.ok) << (diags.empty() ? "" : render(diags[0]));
  return r;
}

double share_of(const solver::Mode& m, const std::string& part) {
  for (const auto& p : m.parts)
    if (p.name == part) return p.share;
  return 0;
}

TEST(Modes, SeriesRlcPolesDampingAndQ) {
  const double R = 10, L = 1e-3, C = 1e-6;
  const solver::ModesResult r = modes_of(
      "voltage V1 in gnd 1\nresistor R1 in a 10\ninductor L1 a b 1m\ncapacitor C1 b gnd 1u\n"
      "transient until=1m\nmodes\n");
  ASSERT_EQ(r.configurations.size(), 1u);
  const auto& modes = r.configurations[0].modes;
  ASSERT_EQ(modes.size(), 1u);  // one row for the pair
  const solver::Mode& m = modes[0];
  EXPECT_EQ(m.kind, ModeKind::Oscillating);
  // Series RLC natural response s = -alpha +/- j wd, alpha = R/(2L),
  // wd = sqrt(1/(LC) - alpha^2) (Nilsson & Riedel, Electric Circuits,
  // second-order circuits; from memory).
  const double alpha = R / (2 * L);
  const double w0 = 1 / std::sqrt(L * C);
  const double wd = std::sqrt(w0 * w0 - alpha * alpha);
  EXPECT_NEAR(m.pole.real(), -alpha, kTight * std::abs(m.pole));
  EXPECT_NEAR(m.pole.imag(), wd, kTight * wd);
  EXPECT_NEAR(m.damped_hz, wd / (2 * std::numbers::pi), kTight * m.damped_hz);
  EXPECT_NEAR(m.natural_hz, w0 / (2 * std::numbers::pi), kTight * m.natural_hz);
  // zeta = alpha / w0 and Q = 1/(2 zeta) = w0 L / R for the series circuit
  // (same source).
  const double zeta = alpha / w0;
  EXPECT_NEAR(m.damping_ratio, zeta, kTight * zeta);
  EXPECT_NEAR(m.q, w0 * L / R, kTight * m.q);
  EXPECT_NEAR(m.q, 1 / (2 * m.damping_ratio), kTight * m.q);
  EXPECT_NEAR(m.time_constant, 1 / alpha, kTight / alpha);
  EXPECT_FALSE(m.growing);
  // 2x2 algebra (common practice, no source): for A = [a11 a12; a21 a22] the
  // participation factor of state 1 is (lambda1 - a22)/(lambda1 - lambda2);
  // here a22 = -2 alpha (or a11, by symmetry of the argument), so both
  // states have magnitude |lambda|/(2 wd): L and C take half each.
  EXPECT_NEAR(share_of(m, "L1"), 0.5, 1e-12);
  EXPECT_NEAR(share_of(m, "C1"), 0.5, 1e-12);
}

TEST(Modes, RcRealPoleTimeConstant) {
  const solver::ModesResult r = modes_of(
      "voltage V1 in gnd 1\nresistor R1 in out 4k7\ncapacitor C1 out gnd 22n\n"
      "transient until=1m\n");
  ASSERT_EQ(r.configurations.size(), 1u);
  const auto& modes = r.configurations[0].modes;
  ASSERT_EQ(modes.size(), 1u);
  EXPECT_EQ(modes[0].kind, ModeKind::Real);
  // First-order RC: tau = R C (Nilsson & Riedel, Electric Circuits; from memory).
  const double tau = 4.7e3 * 22e-9;
  EXPECT_NEAR(modes[0].time_constant, tau, kTight * tau);
  EXPECT_NEAR(modes[0].pole.real(), -1 / tau, kTight / tau);
  EXPECT_EQ(modes[0].pole.imag(), 0.0);
  ASSERT_EQ(modes[0].parts.size(), 1u);
  EXPECT_EQ(modes[0].parts[0].name, "C1");
  EXPECT_DOUBLE_EQ(modes[0].parts[0].share, 1.0);
}

TEST(Modes, ParticipationSumsToOneAndTankPointsAtItsLAndC) {
  // An LC tank on its own (no resistor touches it) beside an RC ladder.
  const solver::ModesResult r = modes_of(
      "voltage V1 in gnd 1\nresistor R1 in a 1k\ncapacitor C2 a gnd 1u\n"
      "resistor R2 a b 2k\ncapacitor C3 b gnd 470n\ninductor L4 b gnd 10m\n"
      "inductor Lt t gnd 1m\ncapacitor Ct t gnd 1u\ntransient until=1m\n");
  ASSERT_EQ(r.configurations.size(), 1u);
  bool found_tank = false;
  for (const auto& m : r.configurations[0].modes) {
    // Participation factors normalised per mode (Perez-Arriaga, Verghese &
    // Schweppe 1982): over the states and over the parts they sum to 1.
    double by_state = 0, by_part = 0;
    for (double p : m.state_participation) by_state += p;
    for (const auto& p : m.parts) by_part += p.share;
    EXPECT_NEAR(by_state, 1.0, 1e-14);
    EXPECT_NEAR(by_part, 1.0, 1e-14);
    // The tank's mode: undamped at 1/(2 pi sqrt(Lt Ct)) (LC resonance,
    // Nilsson & Riedel; from memory), carried by Lt and Ct only, half each
    // (2x2 algebra as in the series test, with a22 = 0).
    const double f_tank = 1 / (2 * std::numbers::pi * std::sqrt(1e-3 * 1e-6));
    if (m.kind == ModeKind::Oscillating && std::abs(m.natural_hz - f_tank) < 1e-6 * f_tank) {
      found_tank = true;
      EXPECT_NEAR(m.damping_ratio, 0.0, 1e-12);
      EXPECT_TRUE(std::isinf(m.q) || m.q > 1e10);
      ASSERT_GE(m.parts.size(), 2u);
      EXPECT_TRUE((m.parts[0].name == "Lt" && m.parts[1].name == "Ct") ||
                  (m.parts[0].name == "Ct" && m.parts[1].name == "Lt"));
      EXPECT_NEAR(share_of(m, "Lt"), 0.5, 1e-9);
      EXPECT_NEAR(share_of(m, "Ct"), 0.5, 1e-9);
      EXPECT_LT(share_of(m, "C2") + share_of(m, "C3") + share_of(m, "L4"), 1e-9);
    }
  }
  EXPECT_TRUE(found_tank);
}

TEST(Modes, HiddenDcrCountsWithItsInductor) {
  // circuits/tank_kick.rlc: parallel tank with the inductor's dcr. Closed form
  // in that file's header (Nilsson & Riedel; from memory):
  // s^2 + (1/(R C) + dcr/L) s + (1 + dcr/R)/(L C) = 0.
  LoadResult loaded = load_file(std::string(RINGDOWN_SOURCE_DIR) + "/circuits/tank_kick.rlc");
  ASSERT_TRUE(loaded.ok());
  Diagnostics diags;
  const solver::ModesResult r = solver::compute_modes(*loaded.circuit, {}, diags);
  ASSERT_TRUE(r.ok);
  ASSERT_EQ(r.configurations.size(), 1u);
  ASSERT_EQ(r.configurations[0].modes.size(), 1u);
  const solver::Mode& m = r.configurations[0].modes[0];
  const double L = 10e-6, C = 10e-9, R = 500, dcr = 50e-3;
  const double b = 1 / (R * C) + dcr / L, c = (1 + dcr / R) / (L * C);
  const std::complex<double> s(-b / 2, std::sqrt(c - b * b / 4));
  EXPECT_NEAR(m.pole.real(), s.real(), kTight * std::abs(s));
  EXPECT_NEAR(m.pole.imag(), s.imag(), kTight * std::abs(s));
  EXPECT_NEAR(m.damping_ratio, 0.032412, 1e-6);  // the file's figure (5 digits)
  ASSERT_EQ(m.parts.size(), 2u);                 // "L1" (not "L1.dcr") and "C1"
  EXPECT_GT(share_of(m, "L1"), 0.4);
  EXPECT_GT(share_of(m, "C1"), 0.4);
}

TEST(Modes, ButterworthLadderPolesOnTheCircle) {
  // circuits/butterworth_step.rlc: third-order Butterworth ladder at 100 kHz
  // between equal terminations. Its poles are wc * {-1, -1/2 +/- j sqrt(3)/2}:
  // 1/((p+1)(p^2+p+1)), p = s/wc (Butterworth 1930; Zverev, Handbook of Filter
  // Synthesis, 1967; from memory; the file's header derives it).
  LoadResult loaded =
      load_file(std::string(RINGDOWN_SOURCE_DIR) + "/circuits/butterworth_step.rlc");
  ASSERT_TRUE(loaded.ok());
  Diagnostics diags;
  const solver::ModesResult r = solver::compute_modes(*loaded.circuit, {}, diags);
  ASSERT_TRUE(r.ok);
  ASSERT_EQ(r.configurations.size(), 1u);
  const auto& modes = r.configurations[0].modes;
  ASSERT_EQ(modes.size(), 2u);
  const double wc = 2 * std::numbers::pi * 100e3;
  EXPECT_EQ(modes[0].kind, ModeKind::Real);  // sorted by frequency: the real pole first
  EXPECT_NEAR(modes[0].pole.real(), -wc, kTight * wc);
  EXPECT_EQ(modes[1].kind, ModeKind::Oscillating);
  EXPECT_NEAR(modes[1].pole.real(), -wc / 2, kTight * wc);
  EXPECT_NEAR(modes[1].pole.imag(), wc * std::sqrt(3.0) / 2, kTight * wc);
  EXPECT_NEAR(modes[1].damping_ratio, 0.5, kTight);
  EXPECT_NEAR(modes[1].q, 1.0, kTight);
}

TEST(Modes, CriticalDampingIsHandled) {
  // R = 2 sqrt(L/C): critically damped, a double pole at -alpha = -R/(2L)
  // with one eigenvector (Nilsson & Riedel; from memory). Rounding splits a
  // defective double eigenvalue by about sqrt(eps) relative (Golub & Van
  // Loan, 2013, sec. 7.2; from memory), so the poles are within 1e-6 of it.
  const solver::ModesResult r = modes_of(
      "voltage V1 in gnd 1\nresistor R1 in a 2\ninductor L1 a b 1u\ncapacitor C1 b gnd "
      "1u\nmodes\n");
  ASSERT_EQ(r.configurations.size(), 1u);
  const auto& modes = r.configurations[0].modes;
  ASSERT_GE(modes.size(), 1u);
  for (const auto& m : modes) {
    EXPECT_NEAR(m.pole.real(), -1e6, 1e-6 * 1e6);
    EXPECT_LT(std::abs(m.pole.imag()), 1e-6 * 1e6);
    double sum = 0;
    for (const auto& p : m.parts) sum += p.share;
    EXPECT_NEAR(sum, 1.0, 1e-12);  // normalisation (Perez-Arriaga et al. 1982)
  }
  EXPECT_GT(r.configurations[0].eigenvector_condition, 1e6);  // flagged as near-defective
}

TEST(Modes, SwitchGivesTwoConfigurations) {
  const solver::ModesResult r = modes_of(
      "voltage V1 in gnd 1\nresistor R1 in out 1k\ncapacitor C1 out gnd 1u\n"
      "switch S1 out gnd gate=step(from=0, to=1, at=1m) closed=10 open=1G\n"
      "transient until=5m\n");
  ASSERT_EQ(r.configurations.size(), 2u);
  const auto& before = r.configurations[0];
  const auto& after = r.configurations[1];
  EXPECT_EQ(before.from, 0.0);
  EXPECT_NEAR(after.from, 1e-3, 1e-15);
  ASSERT_EQ(before.closed.size(), 1u);
  EXPECT_FALSE(before.closed[0]);
  EXPECT_TRUE(after.closed[0]);
  ASSERT_EQ(before.modes.size(), 1u);
  ASSERT_EQ(after.modes.size(), 1u);
  // tau = C (R1 || Rswitch) (Thevenin resistance seen by C1; Nilsson & Riedel;
  // from memory).
  auto par = [](double a, double b) { return a * b / (a + b); };
  EXPECT_NEAR(before.modes[0].time_constant, 1e-6 * par(1e3, 1e9), kTight * 1e-3);
  EXPECT_NEAR(after.modes[0].time_constant, 1e-6 * par(1e3, 10), kTight * 1e-5);
}

TEST(Modes, SwitchBeyondUntilAndNoTransientGiveOne) {
  // The gate crosses at 1 ms; a run to 0.5 ms never meets it, and without a
  // transient only the initial configuration counts (NETLIST.md section 7).
  const std::string net =
      "voltage V1 in gnd 1\nresistor R1 in out 1k\ncapacitor C1 out gnd 1u\n"
      "switch S1 out gnd gate=step(from=0, to=1, at=1m)\n";
  EXPECT_EQ(modes_of(net + "transient until=0.5m\n").configurations.size(), 1u);
  EXPECT_EQ(modes_of(net + "modes\n").configurations.size(), 1u);
  // A pulse gate meets two configurations many times: each listed once.
  EXPECT_EQ(modes_of("voltage V1 in gnd 1\nresistor R1 in out 1k\ncapacitor C1 out gnd 1u\n"
                     "switch S1 out gnd gate=pulse(high=1, period=1m, duty=0.5, start=0.1m)\n"
                     "transient until=10m\n")
                .configurations.size(),
            2u);
}

TEST(Modes, NegativeResistanceGivesAGrowingMode) {
  // Parallel RLC with R < 0: s^2 + s/(R C) + 1/(L C) = 0 (Nilsson & Riedel;
  // from memory), Re(s) = -1/(2 R C) > 0.
  const solver::ModesResult r =
      modes_of("resistor Rn a gnd -1k\ninductor L1 a gnd 1m\ncapacitor C1 a gnd 1u\nmodes\n");
  ASSERT_EQ(r.configurations.size(), 1u);
  ASSERT_EQ(r.configurations[0].modes.size(), 1u);
  const solver::Mode& m = r.configurations[0].modes[0];
  EXPECT_TRUE(m.growing);
  EXPECT_LT(m.damping_ratio, 0);
  EXPECT_NEAR(m.pole.real(), 1 / (2 * 1e3 * 1e-6), kTight * std::abs(m.pole));
}

TEST(Modes, BalancingIsASimilarity) {
  // D^-1 A D has the eigenvalues of A (similarity; Golub & Van Loan, Matrix
  // Computations, 2013, sec. 7.5.7 on balancing; from memory), and its entries
  // are exactly D^-1 A D for the D returned.
  Eigen::MatrixXd A(3, 3);
  A << -1, 1e6, 0, 1e-6, -2, 1e4, 0, 1e-4, -3;
  Eigen::MatrixXd B = A;
  const Eigen::VectorXd d = solver::balance(B);
  const Eigen::MatrixXd expect = d.cwiseInverse().asDiagonal() * A * d.asDiagonal();
  EXPECT_EQ((B - expect).cwiseAbs().maxCoeff(), 0.0);
  EXPECT_LT(B.cwiseAbs().maxCoeff(), 1e2);  // the 1e6 entry brought to scale
  Eigen::EigenSolver<Eigen::MatrixXd> ea(A, false), eb(B, false);
  auto sorted = [](Eigen::VectorXcd v) {
    std::vector<double> re(static_cast<std::size_t>(v.size()));
    for (Eigen::Index i = 0; i < v.size(); ++i) re[static_cast<std::size_t>(i)] = v(i).real();
    std::sort(re.begin(), re.end());
    return re;
  };
  const auto ra = sorted(ea.eigenvalues()), rb = sorted(eb.eigenvalues());
  for (std::size_t i = 0; i < ra.size(); ++i)
    EXPECT_NEAR(ra[i], rb[i], 1e-9 * std::abs(ra[i]) + 1e-12);
}

TEST(Modes, BadNetworkIsAnError) {
  // Two voltage sources in parallel: mna's topology check (a loop of voltage
  // sources) rejects it, and modes reports that instead of computing.
  LoadResult loaded = load_text(
      "voltage V1 a gnd 1\nvoltage V2 a gnd 2\nresistor R1 a gnd 1k\n"
      "capacitor C1 a gnd 1u\nmodes\n",
      "bad.rlc");
  ASSERT_TRUE(loaded.ok());
  Diagnostics diags;
  const solver::ModesResult r = solver::compute_modes(*loaded.circuit, {}, diags);
  EXPECT_FALSE(r.ok);
  EXPECT_FALSE(r.numerical_failure);
  EXPECT_TRUE(has_errors(diags));
}

}  // namespace
