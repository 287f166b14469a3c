// The byte encoding of a sweep job's result (cli/sweep_job.hpp), which the ranks of a
// distributed run send to rank 0: every field survives a round trip bit for bit (NaN and
// signed zero too), several results read back in order, and truncated bytes are refused
// rather than read past their end. The distributed run itself is checked end to end by
// tests/mpi/check_mpi.sh (MPI builds).
#include <gtest/gtest.h>

#include <cmath>
#include <cstring>
#include <limits>
#include <vector>

#include "cli/sweep_job.hpp"

namespace {

using ringdown::cli::JobResult;

bool same_bits(double a, double b) { return std::memcmp(&a, &b, sizeof a) == 0; }

JobResult sample_result() {
  JobResult r;
  r.exit_code = 3;
  ringdown::Diagnostic d;
  d.severity = ringdown::Severity::Warning;
  d.where = {"a.rlc", 12, 5, 7, "resistor R1 a b 1k"};
  d.message = "rated power exceeded";
  d.hint = "a larger part";
  r.diagnostics = {d, ringdown::Diagnostic{}};
  r.drawn = {1.1e3, -0.0, std::numeric_limits<double>::quiet_NaN()};
  ringdown::solver::FigureValue f;
  f.value = 0.1 + 0.2;
  f.unit = ringdown::Dimension::volt();
  f.note = "does not ring";
  ringdown::solver::FigureValue g;
  g.ok = false;
  g.error = "rise(out): no step";
  r.reports = {f, g};
  r.expect_values = {g, f, f};
  r.expect_pass = {true, false, true};
  r.pass = false;
  ringdown::cli::SafetyReport s;
  s.hazardous = true;
  s.band.dc = 60;
  s.band.accept_risk = true;
  s.points.push_back({"bus", 325.3, 1e-3, 84.1, true, false});
  ringdown::cli::StoredCharge c;
  c.capacitor = "Cb";
  c.voltage = 300;
  c.energy = 3.06;
  c.bleed_time = 23.0;
  ringdown::cli::StoredCharge c2;
  c2.note = "no bleed path";
  s.stored = {c, c2};
  s.limitation = "on the samples";
  r.hazard = s;
  r.times = {0, 1e-9, 2e-9};
  r.samples = {{1, 2, 3}, {}, {4}};
  return r;
}

void expect_same_figure(const ringdown::solver::FigureValue& a, const ringdown::solver::FigureValue& b) {
  EXPECT_TRUE(same_bits(a.value, b.value));
  EXPECT_EQ(a.unit.has_value(), b.unit.has_value());
  if (a.unit && b.unit) {
    EXPECT_TRUE(*a.unit == *b.unit);
  }
  EXPECT_EQ(a.note, b.note);
  EXPECT_EQ(a.ok, b.ok);
  EXPECT_EQ(a.error, b.error);
}

TEST(SweepJob, EveryFieldRoundTrips) {
  const JobResult a = sample_result();
  std::vector<std::uint8_t> bytes;
  encode(a, bytes);
  encode(JobResult{}, bytes);
  std::size_t pos = 0;
  JobResult b, empty;
  ASSERT_TRUE(decode(bytes, pos, b));
  ASSERT_TRUE(decode(bytes, pos, empty));
  EXPECT_EQ(pos, bytes.size());
  EXPECT_EQ(b.exit_code, 3);
  ASSERT_EQ(b.diagnostics.size(), 2u);
  EXPECT_EQ(b.diagnostics[0].severity, ringdown::Severity::Warning);
  EXPECT_EQ(b.diagnostics[0].where.file, "a.rlc");
  EXPECT_EQ(b.diagnostics[0].where.line, 12);
  EXPECT_EQ(b.diagnostics[0].where.column, 5);
  EXPECT_EQ(b.diagnostics[0].where.length, 7);
  EXPECT_EQ(b.diagnostics[0].where.source_line, "resistor R1 a b 1k");
  EXPECT_EQ(b.diagnostics[0].message, "rated power exceeded");
  EXPECT_EQ(b.diagnostics[0].hint, "a larger part");
  EXPECT_EQ(b.diagnostics[1].severity, ringdown::Severity::Error);
  ASSERT_EQ(b.drawn.size(), 3u);
  for (std::size_t i = 0; i < 3; ++i) EXPECT_TRUE(same_bits(a.drawn[i], b.drawn[i])) << i;
  ASSERT_EQ(b.reports.size(), 2u);
  for (std::size_t i = 0; i < 2; ++i) expect_same_figure(a.reports[i], b.reports[i]);
  ASSERT_EQ(b.expect_values.size(), 3u);
  for (std::size_t i = 0; i < 3; ++i) expect_same_figure(a.expect_values[i], b.expect_values[i]);
  EXPECT_EQ(b.expect_pass, a.expect_pass);
  EXPECT_FALSE(b.pass);
  ASSERT_TRUE(b.hazard.has_value());
  EXPECT_TRUE(b.hazard->hazardous);
  EXPECT_EQ(b.hazard->band.dc, 60);
  EXPECT_EQ(b.hazard->band.ac_rms, 50);
  EXPECT_TRUE(b.hazard->band.accept_risk);
  ASSERT_EQ(b.hazard->points.size(), 1u);
  EXPECT_EQ(b.hazard->points[0].name, "bus");
  EXPECT_EQ(b.hazard->points[0].peak, 325.3);
  EXPECT_EQ(b.hazard->points[0].ac_rms, 84.1);
  EXPECT_TRUE(b.hazard->points[0].over_dc);
  EXPECT_FALSE(b.hazard->points[0].over_ac);
  ASSERT_EQ(b.hazard->stored.size(), 2u);
  EXPECT_EQ(b.hazard->stored[0].capacitor, "Cb");
  EXPECT_EQ(b.hazard->stored[0].energy, 3.06);
  EXPECT_EQ(b.hazard->stored[0].bleed_time, 23.0);
  EXPECT_FALSE(b.hazard->stored[1].bleed_time.has_value());
  EXPECT_EQ(b.hazard->stored[1].note, "no bleed path");
  EXPECT_EQ(b.hazard->limitation, "on the samples");
  EXPECT_EQ(b.times, a.times);
  EXPECT_EQ(b.samples, a.samples);
  EXPECT_TRUE(empty.diagnostics.empty());
  EXPECT_FALSE(empty.hazard.has_value());
  EXPECT_TRUE(empty.pass);
}

TEST(SweepJob, TruncatedBytesAreRefused) {
  std::vector<std::uint8_t> bytes;
  encode(sample_result(), bytes);
  for (std::size_t cut : {std::size_t{0}, std::size_t{3}, bytes.size() / 2, bytes.size() - 1}) {
    const std::vector<std::uint8_t> part(bytes.begin(), bytes.begin() + static_cast<std::ptrdiff_t>(cut));
    std::size_t pos = 0;
    JobResult r;
    EXPECT_FALSE(decode(part, pos, r)) << cut;
    EXPECT_LE(pos, part.size());
  }
}

}  // namespace
