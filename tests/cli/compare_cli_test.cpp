// End-to-end tests of `ringdown compare` (CLI.md): two revisions side by side, a file against
// itself (zero difference, the check), a file against a capture of its own output
// (the piecewise-linear reading of the samples agrees with the exact solution at the samples),
// the overlay plot file, and the usage errors (exit 2).
#include <gtest/gtest.h>
#include <unistd.h>

#include <cmath>
#include <filesystem>
#include <fstream>
#include <nlohmann/json.hpp>
#include <sstream>
#include <string>

#include "process.hpp"
#include "scratch_dir.hpp"

namespace fs = std::filesystem;
using ringdown::test::ProcessResult;
using ringdown::test::run_ringdown;

namespace {

constexpr int kOk = 0, kBadInput = 2;  // CLI.md exit codes

// Series RLC step (R, L = 1 mH, C = 1 uF): R = 20 Ohm gives zeta = 0.316, overshoot 35.09 %
// (second-order step response; Ogata, Modern Control Engineering; from memory).
std::string rlc(const std::string& r) {
  return "voltage   V1 in gnd step(from=0, to=10V, at=0)\n"
         "resistor  R1 in a " + r + "\n"
         "inductor  L1 a b 1mH\n"
         "capacitor C1 b gnd 1uF\n"
         "transient until=3m every=1u\n"  // exp(-alpha t) = 1e-13: final is the steady state

         "record b\n"
         "report vpk = max(b)\n"
         "report os = overshoot(b)\n"
         "expect overshoot(b) < 30%\n";
}

class CompareCli : public ringdown::test::ScratchDirTest {
 protected:
  static std::string read(const std::string& path) { return read_all(path); }
};

TEST_F(CompareCli, FileWithItselfHasZeroDifference) {
  const std::string f = write("a.rlc", rlc("20"));
  const std::string json = (dir_ / "c.json").string();
  const ProcessResult r = run_ringdown({"compare", f, f, "--json", json});
  ASSERT_EQ(r.exit_code, kOk) << r.err;
  const nlohmann::json j = nlohmann::json::parse(read(json));
  ASSERT_EQ(j["figures"].size(), 2u);
  for (const auto& x : j["figures"]) EXPECT_EQ(x["difference"].get<double>(), 0.0) << x.dump();
  EXPECT_NE(r.out.find("+0 %"), std::string::npos) << r.out;
}

TEST_F(CompareCli, TwoRevisionsSideBySide) {
  // zeta = R/2 sqrt(C/L): 20 Ohm -> 0.316 (35.09 % overshoot, fails < 30 %), 40 Ohm -> 0.632
  // (7.69 % overshoot, passes). Closed form exp(-pi zeta/sqrt(1-zeta^2)).
  const std::string a = write("a.rlc", rlc("20")), b = write("b.rlc", rlc("40"));
  const std::string json = (dir_ / "c.json").string();
  const ProcessResult r = run_ringdown({"compare", a, b, "--json", json});
  ASSERT_EQ(r.exit_code, kOk) << r.err;
  EXPECT_NE(r.out.find("FAIL  pass"), std::string::npos) << r.out;
  const nlohmann::json j = nlohmann::json::parse(read(json));
  const auto os = j["figures"][1];
  EXPECT_EQ(os["name"], "os");
  const double za = 0.31622776601683794, zb = 0.6324555320336759;
  const double osa = std::exp(-M_PI * za / std::sqrt(1 - za * za));
  const double osb = std::exp(-M_PI * zb / std::sqrt(1 - zb * zb));
  EXPECT_NEAR(os["a"]["value"].get<double>(), osa, 1e-9);
  EXPECT_NEAR(os["b"]["value"].get<double>(), osb, 1e-9);
  EXPECT_NEAR(os["difference"].get<double>(), osb - osa, 1e-9);
  EXPECT_EQ(j["expects"][0]["pass_a"], false);
  EXPECT_EQ(j["expects"][0]["pass_b"], true);
}

TEST_F(CompareCli, CaptureOfItsOwnOutputAgreesAtTheSamples) {
  const std::string f = write("a.rlc", rlc("20"));
  const std::string csv = (dir_ / "capture.csv").string();
  ASSERT_EQ(run_ringdown({"run", f, "--quiet", "--csv", csv, "--digits", "17"}).exit_code, kOk);
  const std::string json = (dir_ / "m.json").string();
  const std::string png = (dir_ / "overlay.png").string();
  const ProcessResult r =
      run_ringdown({"compare", f, "--measured", csv, "--map", "b=b", "--json", json, "--plot", png});
  ASSERT_EQ(r.exit_code, kOk) << r.err;
  const nlohmann::json j = nlohmann::json::parse(read(json));
  // The capture holds the exact samples (every 1 us, 210 per ring period); its piecewise-linear
  // peak sits on the sample nearest the true peak, so it is below the exact one by about
  // (w dt)^2/2 of the swing (Taylor expansion at the maximum): 3.5 V * 4.5e-4 = 1.6 mV at most.
  const auto vpk = j["figures"][0];
  EXPECT_LE(vpk["b"]["value"].get<double>(), vpk["a"]["value"].get<double>());
  EXPECT_LT(std::abs(vpk["difference"].get<double>()), 2e-3);
  ASSERT_TRUE(fs::exists(png));
  EXPECT_EQ(read(png).substr(1, 3), "PNG");
}

TEST_F(CompareCli, UsageErrorsExitTwo) {
  const std::string f = write("a.rlc", rlc("20"));
  EXPECT_EQ(run_ringdown({"compare", f}).exit_code, kBadInput);
  EXPECT_EQ(run_ringdown({"compare", f, "--measured", (dir_ / "none.csv").string(), "--map", "b=b"}).exit_code,
            kBadInput);
  const std::string csv = write("c.csv", "time,ch1\n0,0\n1e-3,1\n");
  EXPECT_EQ(run_ringdown({"compare", f, "--measured", csv}).exit_code, kBadInput);  // no --map
  const ProcessResult col = run_ringdown({"compare", f, "--measured", csv, "--map", "b=CH9"});
  EXPECT_EQ(col.exit_code, kBadInput);
  EXPECT_NE(col.err.find("CH9"), std::string::npos) << col.err;
}

}  // namespace
