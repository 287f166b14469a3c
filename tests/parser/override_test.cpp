// --set overrides in unit errors, and no follow-on errors for an element whose
// own line failed (common practice for compiler diagnostics, no source).
#include <gtest/gtest.h>

#include "parser_test_util.hpp"

namespace ringdown {
namespace {

const char* kRc =
    "R = 1k\n"
    "voltage V1 in gnd step(to=1V)\n"
    "resistor R1 in out R\n"
    "capacitor C1 out gnd 1u\n"
    "transient until=5m\n"
    "record out, R1.i\n";

TEST(Override, UnitMismatchThroughSetNamesTheCommandLine) {
  LoadOptions options;
  options.overrides = {{"R", "1V"}};
  auto r = testing::load(kRc, options);
  testing::expect_error(r, 3, 20, "is in V (voltage), but a resistance is in Ohm",
                        "(set on the command line)");
}

TEST(Override, NoFollowOnErrorForAFailedElement) {
  LoadOptions options;
  options.overrides = {{"R", "1V"}};
  auto r = testing::load(kRc, options);
  EXPECT_EQ(testing::find_diagnostic(r, "unknown node or element 'R1.i'"), nullptr)
      << testing::all_messages(r);
  int errors = 0;
  for (const Diagnostic& d : r.diagnostics) errors += d.severity == Severity::Error;
  EXPECT_EQ(errors, 1) << testing::all_messages(r);
}

TEST(Override, UnknownElementStillReportedWithSuggestion) {
  auto r = testing::load(
      "voltage V1 in gnd 1V\nresistor R1 in gnd 1k\ntransient until=1m\nrecord R2.i\n");
  testing::expect_error(r, 4, 8, "unknown node or element 'R2.i'", "did you mean");
}


TEST(Override, ListValueBecomesASweep) {
  // --set NAME=LIST (issue 6): a list or a series call is a sweep of NAME, with the
  // parameter's own value unchanged for the nominal circuit.
  LoadOptions options;
  options.overrides = {{"R", "(1k, 2.2k, 4.7k)"}};
  auto r = testing::load(kRc, options);
  ASSERT_TRUE(r.ok()) << testing::all_messages(r);
  ASSERT_EQ(r.circuit->sweeps.size(), 1U);
  EXPECT_EQ(r.circuit->sweeps[0].parameter, "R");
  EXPECT_EQ(r.circuit->sweeps[0].values, (std::vector<double>{1e3, 2.2e3, 4.7e3}));
  EXPECT_EQ(r.circuit->elements[r.circuit->find_element("R1")].value, 1e3);
}

TEST(Override, ListReplacesTheFilesSweepInPlace) {
  // IEC 60063 E6 between 1k and 10k: 1.0 1.5 2.2 3.3 4.7 6.8 (table 1; from memory) and 10k.
  LoadOptions options;
  options.overrides = {{"R", "e6(1k, 10k)"}};
  auto r = testing::load(std::string(kRc) + "C = 1u\nsweep R = (1, 2)\nsweep C = (1u, 2u)\n", options);
  ASSERT_TRUE(r.ok()) << testing::all_messages(r);
  ASSERT_EQ(r.circuit->sweeps.size(), 2U);
  EXPECT_EQ(r.circuit->sweeps[0].parameter, "R");
  EXPECT_EQ(r.circuit->sweeps[0].values,
            (std::vector<double>{1e3, 1.5e3, 2.2e3, 3.3e3, 4.7e3, 6.8e3, 10e3}));
  EXPECT_EQ(r.circuit->sweeps[1].parameter, "C");
}

TEST(Override, ListOfAnUnknownParameterIsAnError) {
  LoadOptions options;
  options.overrides = {{"Rq", "(1k, 2k)"}};
  auto r = testing::load(kRc, options);
  EXPECT_FALSE(r.ok());
  EXPECT_NE(testing::find_diagnostic(r, "there is no parameter 'Rq'"), nullptr) << testing::all_messages(r);
}

}  // namespace
}  // namespace ringdown
