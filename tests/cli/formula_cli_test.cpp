// End-to-end tests of formula() sources through the ringdown binary: a run with a formula
// writes the same CSV as with the exact waveform (to the fit's tolerance), a formula that
// is not finite in the run exits 2 with a positioned error and leaves no output file, and
// a formula the fit cannot follow (a jump) runs with a warning.
#include <gtest/gtest.h>
#include <unistd.h>

#include <cmath>
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

constexpr int kOk = 0, kBadInput = 2;  // CLI.md exit codes

class FormulaCli : public ::testing::Test {
 protected:
  void SetUp() override {
    char pattern[] = "/tmp/ringdown-formula-test-XXXXXX";
    ASSERT_NE(::mkdtemp(pattern), nullptr);
    dir_ = pattern;
  }
  void TearDown() override { fs::remove_all(dir_); }
  std::string write(const std::string& name, const std::string& text) {
    const fs::path path = dir_ / name;
    std::ofstream(path, std::ios::binary) << text;
    return path.string();
  }
  std::string path(const std::string& name) const { return (dir_ / name).string(); }
  std::size_t files() const {
    std::size_t n = 0;
    for (const auto& e : fs::directory_iterator(dir_)) n += e.is_regular_file() ? 1 : 0;
    return n;
  }
  fs::path dir_;
};

// Rows of a CSV file as numbers (header skipped).
std::vector<std::vector<double>> rows_of(const std::string& file) {
  std::ifstream in(file);
  std::string line;
  std::getline(in, line);
  std::vector<std::vector<double>> out;
  while (std::getline(in, line)) {
    std::vector<double> row;
    std::istringstream fields(line);
    std::string f;
    while (std::getline(fields, f, ',')) row.push_back(std::stod(f));
    out.push_back(row);
  }
  return out;
}

TEST_F(FormulaCli, FormulaSineGivesTheExactSinesCsv) {
  const std::string file = write("sine.rlc",
                                 "voltage V1 in1 gnd formula(2*sin(2*pi*1k*t))\n"
                                 "resistor R1 in1 out1 1k\ncapacitor C1 out1 gnd 100n\n"
                                 "voltage V2 in2 gnd sine(freq=1k, amp=2)\n"
                                 "resistor R2 in2 out2 1k\ncapacitor C2 out2 gnd 100n\n"
                                 "transient until=5ms every=50us\nrecord out1, out2\n");
  const ProcessResult r =
      run_ringdown({"run", file, "--quiet", "--digits", "17", "--csv", path("out.csv")});
  ASSERT_EQ(r.exit_code, kOk) << r.err;
  EXPECT_EQ(r.err.find("warning"), std::string::npos) << r.err;
  const auto rows = rows_of(path("out.csv"));
  ASSERT_EQ(rows.size(), 101u);
  double diff = 0;
  for (const auto& row : rows) diff = std::max(diff, std::abs(row[1] - row[2]));
  // The fit's default tolerance is 1e-9 of the 2 V peak; the RC's impulse response has unit
  // integral (Young's inequality: the output error is at most the input's; from memory).
  EXPECT_LT(diff, 2 * 1e-9 * 2.0);
}

TEST_F(FormulaCli, FormulaThatIsNotFiniteExitsTwoAndWritesNothing) {
  const std::string file = write("nan.rlc",
                                 "title \"bad formula\"\n"
                                 "voltage V1 in gnd formula(1V*sqrt(t/1s - 1u))\n"
                                 "resistor R1 in out 1k\ncapacitor C1 out gnd 1n\n"
                                 "transient until=5us every=10ns\nrecord out\n");
  const std::size_t before = files();
  const ProcessResult r = run_ringdown({"run", file, "--csv", path("out.csv")});
  EXPECT_EQ(r.exit_code, kBadInput) << r.err;
  EXPECT_NE(r.err.find("nan.rlc:2:1: error: V1: formula(1V*sqrt(t/1s - 1u)) is not finite at "
                       "t = 0 s"),
            std::string::npos)
      << r.err;
  EXPECT_NE(r.err.find("hint: "), std::string::npos) << r.err;
  EXPECT_EQ(files(), before);  // no CSV, no temporary left behind
}

TEST_F(FormulaCli, JumpRunsWithAWarning) {
  const std::string file = write("jump.rlc",
                                 "voltage V1 in gnd formula(min(1, max(0, (t - 1.2345ms)*1e15)))\n"
                                 "resistor R1 in out 1k\ncapacitor C1 out gnd 100n\n"
                                 "transient until=3ms every=10us\nrecord out\n");
  const ProcessResult r = run_ringdown({"run", file, "--quiet"});
  EXPECT_EQ(r.exit_code, kOk) << r.err;
  EXPECT_NE(r.err.find("jump.rlc:1:1: warning: V1: formula("), std::string::npos) << r.err;
  EXPECT_NE(r.err.find("the fit's estimated error is"), std::string::npos) << r.err;
}

}  // namespace
