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

}  // namespace
}  // namespace ringdown
