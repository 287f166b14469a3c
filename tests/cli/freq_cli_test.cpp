// End-to-end tests of `ringdown freq` (CLI.md; NETLIST.md section 7): the
// built binary is run on small circuit files in a fresh temporary directory;
// the CSV header, row count and values, the summary, and the exit status of
// bad input are checked.
#include <gtest/gtest.h>
#include <unistd.h>

#include <cmath>
#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <sstream>
#include <string>
#include <vector>

#include "process.hpp"

namespace fs = std::filesystem;
using ringdown::test::ProcessResult;
using ringdown::test::run_ringdown;

namespace {

// Exit codes of CLI.md.
constexpr int kOk = 0, kBadInput = 2;
constexpr double kPi = 3.14159265358979323846;

// RC low-pass, tau = 1 us: corner 1/(2 pi tau) = 159.155 kHz.
constexpr const char* kRc = R"(title "RC low-pass"
voltage   V1 in  gnd  step(from=0, to=5V, at=1u)
current   Iload out gnd 1mA
resistor  R1 in  out  1k
capacitor C1 out gnd  1n
frequency from=1kHz to=1MHz per_decade=50 input=V1
record    out
)";

class FreqCli : public ::testing::Test {
 protected:
  void SetUp() override {
    const auto* info = ::testing::UnitTest::GetInstance()->current_test_info();
    dir_ = fs::temp_directory_path() /
           ("ringdown_freq_" + std::string(info->name()) + "_" + std::to_string(::getpid()));
    fs::remove_all(dir_);
    fs::create_directories(dir_);
  }
  void TearDown() override { fs::remove_all(dir_); }
  std::string write(const std::string& name, const std::string& text) {
    const fs::path p = dir_ / name;
    std::ofstream(p) << text;
    return p.string();
  }
  static std::vector<std::string> lines(const std::string& path) {
    std::ifstream in(path);
    std::vector<std::string> out;
    for (std::string line; std::getline(in, line);) {
      if (!line.empty() && line.back() == '\r') line.pop_back();
      out.push_back(line);
    }
    return out;
  }
  fs::path dir_;
};

TEST_F(FreqCli, WritesHeaderAndOneRowPerPoint) {
  const std::string file = write("rc.rlc", kRc);
  const std::string csv = (dir_ / "rc.csv").string();
  const ProcessResult r = run_ringdown({"freq", file, "--csv", csv});
  ASSERT_EQ(r.exit_code, kOk) << r.err;
  const auto rows = lines(csv);
  // CLI.md: header freq,<signal>.db,<signal>.deg.
  ASSERT_FALSE(rows.empty());
  EXPECT_EQ(rows[0], "freq,out.db,out.deg");
  // NETLIST.md section 7: 3 decades at 50 per decade, both ends on the grid.
  EXPECT_EQ(rows.size(), 1u + 151u);
  // Each row against 1/(1 + j w RC) (closed form, any circuits text); the
  // 12 significant digits of CLI.md bound the error.
  for (std::size_t i = 1; i < rows.size(); ++i) {
    double f = 0, db = 0, deg = 0;
    ASSERT_EQ(std::sscanf(rows[i].c_str(), "%lf,%lf,%lf", &f, &db, &deg), 3) << rows[i];
    const double wrc = 2 * kPi * f * 1e-6;
    EXPECT_NEAR(db, -10 * std::log10(1 + wrc * wrc), 1e-9) << rows[i];
    EXPECT_NEAR(deg, -std::atan(wrc) * 180 / kPi, 1e-8) << rows[i];
  }
  // The summary names the input and the figures.
  EXPECT_NE(r.out.find("RC low-pass"), std::string::npos) << r.out;
  EXPECT_NE(r.out.find("V1"), std::string::npos) << r.out;
  EXPECT_NE(r.out.find("151 points"), std::string::npos) << r.out;
  EXPECT_NE(r.out.find("corner       159.155 kHz"), std::string::npos) << r.out;
  EXPECT_NE(r.out.find("dc_gain"), std::string::npos) << r.out;
}

TEST_F(FreqCli, FlagsOverrideTheFile) {
  const std::string file = write("rc.rlc", kRc);
  // From the load current (drawn out of node out): out/I = -R/(1 + j w RC),
  // near 1 kOhm = 60 dB and 180 deg at 10 Hz (Ohm's law, closed form).
  const ProcessResult r = run_ringdown({"freq", file, "--input", "Iload", "--from", "10Hz",
                                        "--to", "100Hz", "--per-decade", "2", "--csv", "-"});
  ASSERT_EQ(r.exit_code, kOk) << r.err;
  std::istringstream in(r.out);
  std::vector<std::string> rows;
  for (std::string line; std::getline(in, line);) rows.push_back(line);
  ASSERT_EQ(rows.size(), 4u) << r.out;  // header + 10, 31.6, 100 Hz
  double f = 0, db = 0, deg = 0;
  ASSERT_EQ(std::sscanf(rows[1].c_str(), "%lf,%lf,%lf", &f, &db, &deg), 3);
  EXPECT_NEAR(f, 10.0, 1e-12);
  const double wrc = 2 * kPi * 10.0 * 1e-6;
  EXPECT_NEAR(db, 60.0 - 10 * std::log10(1 + wrc * wrc), 1e-9);
  EXPECT_NEAR(deg, 180.0 - std::atan(wrc) * 180 / kPi, 1e-8);
  // With the CSV on stdout the summary moves to stderr.
  EXPECT_NE(r.err.find("Iload"), std::string::npos) << r.err;
}

TEST_F(FreqCli, BadInputExitsTwo) {
  const std::string file = write("rc.rlc", kRc);
  // Unknown source: did-you-mean.
  ProcessResult r = run_ringdown({"freq", file, "--input", "V2"});
  EXPECT_EQ(r.exit_code, kBadInput);
  EXPECT_NE(r.err.find("did you mean 'V1'"), std::string::npos) << r.err;
  // Not a source.
  r = run_ringdown({"freq", file, "--input", "R1"});
  EXPECT_EQ(r.exit_code, kBadInput);
  EXPECT_NE(r.err.find("not a voltage or current source"), std::string::npos) << r.err;
  // from >= to.
  r = run_ringdown({"freq", file, "--from", "1MHz", "--to", "1kHz"});
  EXPECT_EQ(r.exit_code, kBadInput);
  EXPECT_NE(r.err.find("from < to"), std::string::npos) << r.err;
  // No frequency statement and no --from/--to.
  const std::string bare = write("bare.rlc", R"(voltage V1 in gnd 1V
resistor R1 in out 1k
capacitor C1 out gnd 1n
record out
)");
  r = run_ringdown({"freq", bare, "--input", "V1"});
  EXPECT_EQ(r.exit_code, kBadInput);
  EXPECT_NE(r.err.find("no frequency statement"), std::string::npos) << r.err;
  // ... and it runs once they are given.
  r = run_ringdown({"freq", bare, "--input", "V1", "--from", "1k", "--to", "1MHz"});
  EXPECT_EQ(r.exit_code, kOk) << r.err;
  // A power is not small-signal linear; no CSV is left behind.
  const std::string power = write("p.rlc", R"(voltage V1 in gnd 1V
resistor R1 in out 1k
capacitor C1 out gnd 1n
frequency from=1kHz to=1MHz input=V1
record out, R1.p
)");
  const std::string csv = (dir_ / "p.csv").string();
  r = run_ringdown({"freq", power, "--csv", csv});
  EXPECT_EQ(r.exit_code, kBadInput);
  EXPECT_NE(r.err.find("R1.p"), std::string::npos) << r.err;
  EXPECT_FALSE(fs::exists(csv));
}

}  // namespace
