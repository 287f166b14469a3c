// End-to-end tests of `ringdown modes FILE` (CLI.md): the built binary is run
// on small circuit files in a fresh temporary directory; the printed table is
// read back and compared with closed forms, and the exit codes with CLI.md.
#include <gtest/gtest.h>
#include <unistd.h>

#include <cmath>
#include <filesystem>
#include <fstream>
#include <numbers>
#include <regex>
#include <sstream>
#include <string>
#include <vector>

#include "process.hpp"
#include "scratch_dir.hpp"

namespace fs = std::filesystem;
using ringdown::test::ProcessResult;
using ringdown::test::run_ringdown;

namespace {

constexpr int kOk = 0, kBadInput = 2;  // CLI.md exit codes
// The table prints 4 significant digits: a printed value is within half a
// unit of its last digit, 5e-4 relative at worst.
constexpr double kPrinted = 5e-4;

constexpr const char* kSeriesRlc = R"(title "Series RLC"
Rs = 10
voltage   V1 in gnd step(from=0, to=1, at=1u)
resistor  R1 in a  Rs
inductor  L1 a  b  1mH
capacitor C1 b gnd 1uF
transient until=1m
modes
)";

using ModesCli = ringdown::test::ScratchDirTest;

// Value of an SI-prefixed number as printed ("4.97 kHz", "200 us").
double printed_value(const std::string& number, const std::string& prefix) {
  static const std::string prefixes = "afpnum kMGT";
  double v = std::stod(number);
  if (prefix.empty()) return v;
  const char p = prefix[0] == '\xC2' ? 'u' : prefix[0];  // a micro sign would be 2 bytes
  const auto at = prefixes.find(p);
  if (at == std::string::npos) return v;
  return v * std::pow(10.0, 3.0 * (static_cast<double>(at) - 6.0));
}

std::vector<std::string> mode_rows(const std::string& out) {
  std::vector<std::string> rows;
  std::istringstream in(out);
  std::string line;
  static const std::regex row(R"(^\s+\d+\s+.*)");
  while (std::getline(in, line))
    if (std::regex_match(line, row)) rows.push_back(line);
  return rows;
}

TEST_F(ModesCli, SeriesRlcTableMatchesClosedForm) {
  const ProcessResult r = run_ringdown({"modes", write("rlc.rlc", kSeriesRlc)});
  ASSERT_EQ(r.exit_code, kOk) << r.err;
  EXPECT_NE(r.out.find("Series RLC"), std::string::npos);
  const auto rows = mode_rows(r.out);
  ASSERT_EQ(rows.size(), 1u) << r.out;
  // Row: "1  <fd> kHz  <f0> kHz  <zeta>  <Q>  <tau> us  L1 50%, C1 50%".
  static const std::regex cells(
      R"(^\s+1\s+([0-9.]+) (\S?)Hz\s+([0-9.]+) (\S?)Hz\s+([0-9.]+)\s+([0-9.]+)\s+([0-9.]+) (\S*)s\s+(.*)$)");
  std::smatch m;
  ASSERT_TRUE(std::regex_match(rows[0], m, cells)) << rows[0];
  // Series RLC closed form (Nilsson & Riedel, Electric Circuits; from memory):
  // alpha = R/(2L), w0 = 1/sqrt(LC), wd = sqrt(w0^2 - alpha^2), zeta = alpha/w0.
  const double alpha = 10 / (2 * 1e-3), w0 = 1 / std::sqrt(1e-3 * 1e-6);
  const double wd = std::sqrt(w0 * w0 - alpha * alpha), two_pi = 2 * std::numbers::pi;
  EXPECT_NEAR(printed_value(m[1], m[2]), wd / two_pi, kPrinted * wd / two_pi);
  EXPECT_NEAR(printed_value(m[3], m[4]), w0 / two_pi, kPrinted * w0 / two_pi);
  EXPECT_NEAR(std::stod(m[5]), alpha / w0, kPrinted * alpha / w0);
  EXPECT_NEAR(std::stod(m[6]), w0 / (2 * alpha), kPrinted * w0 / (2 * alpha));  // Q = 1/(2 zeta)
  EXPECT_NEAR(printed_value(m[7], m[8]), 1 / alpha, kPrinted / alpha);
  // Participation: L and C half each (2x2 algebra, see tests/solver/modes_test.cpp).
  EXPECT_NE(std::string(m[9]).find("L1 50%"), std::string::npos) << rows[0];
  EXPECT_NE(std::string(m[9]).find("C1 50%"), std::string::npos) << rows[0];
}

TEST_F(ModesCli, SetOverridesAParameter) {
  // Rs = 0: a lossless tank, zeta = 0 and Q infinite (closed form above).
  const ProcessResult r = run_ringdown({"modes", write("rlc.rlc", kSeriesRlc), "--set", "Rs=1u"});
  ASSERT_EQ(r.exit_code, kOk) << r.err;
  const auto rows = mode_rows(r.out);
  ASSERT_EQ(rows.size(), 1u) << r.out;
  // Q = w0 L / R = 31623 * 1m / 1u = 3.16e7 (same source).
  EXPECT_NE(rows[0].find("3.162e7"), std::string::npos) << rows[0];
}

TEST_F(ModesCli, SwitchGivesTwoTables) {
  const ProcessResult r = run_ringdown(
      {"modes", write("sw.rlc",
                      "voltage V1 in gnd 1\nresistor R1 in out 1k\ncapacitor C1 out gnd 1u\n"
                      "switch S1 out gnd gate=step(from=0, to=1, at=1m) closed=10 open=1G\n"
                      "transient until=5m\nmodes\n")});
  ASSERT_EQ(r.exit_code, kOk) << r.err;
  EXPECT_NE(r.out.find("Configuration 1 of 2, from t = 0 s: S1 open"), std::string::npos) << r.out;
  EXPECT_NE(r.out.find("Configuration 2 of 2, from t = 1 ms: S1 closed"), std::string::npos)
      << r.out;
  const auto rows = mode_rows(r.out);
  ASSERT_EQ(rows.size(), 2u) << r.out;
  // tau = C (R1 || R_switch) (Thevenin; Nilsson & Riedel, from memory):
  // 1 ms open, 9.901 us closed.
  EXPECT_NE(rows[0].find("1 ms"), std::string::npos) << rows[0];
  EXPECT_NE(rows[1].find("9.901 us"), std::string::npos) << rows[1];
}

TEST_F(ModesCli, BadInputExitsTwo) {
  // CLI.md: exit 2 on bad input (file, flag, netlist), with a diagnostic.
  ProcessResult r = run_ringdown({"modes", (dir_ / "missing.rlc").string()});
  EXPECT_EQ(r.exit_code, kBadInput);
  EXPECT_NE(r.err.find("cannot read"), std::string::npos) << r.err;
  r = run_ringdown({"modes", write("bad.rlc", "resistor R1 a gnd\n")});
  EXPECT_EQ(r.exit_code, kBadInput);
  EXPECT_NE(r.err.find("bad.rlc:1:"), std::string::npos) << r.err;
  r = run_ringdown({"modes", write("ok.rlc", kSeriesRlc), "--set", "Rs"});
  EXPECT_EQ(r.exit_code, kBadInput);
  // A loop of voltage sources: mna's topology error.
  r = run_ringdown({"modes", write("loop.rlc",
                                   "voltage V1 a gnd 1\nvoltage V2 a gnd 2\n"
                                   "capacitor C1 a gnd 1u\nmodes\n")});
  EXPECT_EQ(r.exit_code, kBadInput);
  EXPECT_TRUE(r.out.empty()) << r.out;
}

}  // namespace

namespace {

// A `modes` statement makes `run` print the same table after its summary
// (CLI.md: run executes the analyses the file names). The pole is checked
// against the series RLC closed form wd = sqrt(1/(LC) - (R/2L)^2) (Nilsson &
// Riedel, Electric Circuits; from memory): R = 10, L = 1 mH, C = 1 uF gives
// wd / (2 pi) = sqrt(1e9 - 2.5e7) / (2 pi) = 4.970 kHz.
TEST_F(ModesCli, RunPrintsTheModesOfAFileThatAsksForThem) {
  const ProcessResult r = run_ringdown({"run", write("rlc.rlc", kSeriesRlc), "--no-progress"});
  ASSERT_EQ(r.exit_code, kOk) << r.err;
  EXPECT_NE(r.out.find("Natural modes"), std::string::npos) << r.out;
  EXPECT_NE(r.out.find("4.97 kHz"), std::string::npos) << r.out;
  EXPECT_EQ(r.err.find("modes analysis is not run"), std::string::npos) << r.err;
}

}  // namespace
