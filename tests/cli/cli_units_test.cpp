// Unit tests of the cli building blocks that need no child process: the
// command-line number reader, RFC 4180 field quoting, the signal-list
// splitter and the plot decimation.
#include <gtest/gtest.h>

#include <cmath>

#include "cli/csv_writer.hpp"
#include "cli/plot.hpp"
#include "cli/quantity.hpp"
#include "cli/run.hpp"

namespace ringdown::cli {
namespace {

double value_of(const char* text, const char* unit = "s") {
  const QuantityResult r = parse_quantity(text, unit);
  EXPECT_TRUE(r.value.has_value()) << text << ": " << r.error;
  return r.value.value_or(NAN);
}

TEST(Quantity, PrefixesAndUnits) {
  // SI prefixes (SI Brochure, 9th ed. 2019, table 7) as NETLIST.md section 2 lists them.
  EXPECT_DOUBLE_EQ(value_of("2m"), 2e-3);
  EXPECT_DOUBLE_EQ(value_of("200n"), 200e-9);
  EXPECT_DOUBLE_EQ(value_of("10us"), 10e-6);
  EXPECT_DOUBLE_EQ(value_of("10\xC2\xB5s"), 10e-6);  // µs, U+00B5
  EXPECT_DOUBLE_EQ(value_of("1e-6"), 1e-6);
  EXPECT_DOUBLE_EQ(value_of("2.5E-3s"), 2.5e-3);
  EXPECT_DOUBLE_EQ(value_of("3"), 3.0);
  EXPECT_DOUBLE_EQ(value_of("1s"), 1.0);
  EXPECT_DOUBLE_EQ(value_of("5ps"), 5e-12);
  EXPECT_DOUBLE_EQ(value_of("-50m"), -50e-3);
  // m is milli and M mega: case-sensitive as SI defines them (NETLIST.md section 2).
  EXPECT_DOUBLE_EQ(value_of("1M", ""), 1e6);
  EXPECT_DOUBLE_EQ(value_of("1m", ""), 1e-3);
  EXPECT_DOUBLE_EQ(value_of("10K", "Ohm"), 1e4);  // K for kilo, IEC 60062
}

TEST(Quantity, Iec60062Codes) {
  // IEC 60062 letter-and-digit code, the examples of NETLIST.md section 2.
  EXPECT_DOUBLE_EQ(value_of("4k7", "Ohm"), 4700);
  EXPECT_DOUBLE_EQ(value_of("2n2", "F"), 2.2e-9);
  EXPECT_DOUBLE_EQ(value_of("R47", "Ohm"), 0.47);
  EXPECT_DOUBLE_EQ(value_of("4R7", "Ohm"), 4.7);
  EXPECT_DOUBLE_EQ(value_of("1M5", "Ohm"), 1.5e6);
}

TEST(Quantity, Errors) {
  const QuantityResult meg = parse_quantity("1meg", "s");
  EXPECT_FALSE(meg.value);
  EXPECT_NE(meg.hint.find("1M"), std::string::npos) << meg.hint;  // NETLIST.md: says to write 1M
  EXPECT_FALSE(parse_quantity("", "s").value);
  EXPECT_FALSE(parse_quantity("abc", "s").value);
  EXPECT_FALSE(parse_quantity("2x", "s").value);
  EXPECT_FALSE(parse_quantity("1..2", "s").value);
  const QuantityResult wrong_unit = parse_quantity("10V", "s");
  EXPECT_FALSE(wrong_unit.value);
  EXPECT_NE(wrong_unit.error.find("V"), std::string::npos);
  EXPECT_FALSE(parse_quantity("1S", "s").value);  // siemens is not seconds
}

TEST(CsvField, Rfc4180Quoting) {
  // RFC 4180 section 2, rules 6 and 7: fields with commas, quotes or line
  // breaks are enclosed in double quotes, inner quotes doubled.
  EXPECT_EQ(csv_field("drain"), "drain");
  EXPECT_EQ(csv_field("SN1.R1.p"), "SN1.R1.p");
  EXPECT_EQ(csv_field("a,b"), "\"a,b\"");
  EXPECT_EQ(csv_field("say \"hi\""), "\"say \"\"hi\"\"\"");
  EXPECT_EQ(csv_field("two\nlines"), "\"two\nlines\"");
  EXPECT_EQ(csv_field(" padded"), "\" padded\"");
}

TEST(CsvWriter, DigitsAndNoNonFinite) {
  std::FILE* f = std::tmpfile();
  ASSERT_NE(f, nullptr);
  {
    CsvWriter w(f, 5);
    w.header({"x", "y,z"});
    const double good[2] = {1.0 / 3.0, -0.0};
    EXPECT_TRUE(w.row(0.001, good, 2));
    const double bad[2] = {NAN, 1};
    EXPECT_FALSE(w.row(0.002, bad, 2));
    const double inf[2] = {1, INFINITY};
    EXPECT_FALSE(w.row(0.003, inf, 2));
    EXPECT_TRUE(w.flush());
    EXPECT_EQ(w.rows(), 1u);
  }
  std::rewind(f);
  char text[256] = {};
  const std::size_t n = std::fread(text, 1, sizeof text - 1, f);
  std::fclose(f);
  // printf %.5g of 1/3 is 0.33333 (C11 7.21.6.1); -0 is written as 0.
  EXPECT_EQ(std::string(text, n), "time,x,\"y,z\"\r\n0.001,0.33333,0\r\n");
}

TEST(SignalList, SplitsOutsideParentheses) {
  const auto parts = split_signal_list(" drain, Lc.i ,vds = max(a, b)");
  ASSERT_EQ(parts.size(), 3u);
  EXPECT_EQ(parts[0], "drain");
  EXPECT_EQ(parts[1], "Lc.i");
  EXPECT_EQ(parts[2], "vds = max(a, b)");
}

TEST(PlotData, DecimationKeepsExtremesAndEnds) {
  const std::size_t n = 1000001;
  PlotData data({{"s", Dimension::volt()}}, n);
  for (std::size_t k = 0; k < n; ++k) {
    const double t = static_cast<double>(k) * 1e-6;
    // A single-sample spike in the middle must survive decimation.
    const double v = k == 500017 ? 7.0 : std::sin(t);
    data.add(t, &v, 1);
  }
  data.finish();
  const auto& p = data.points()[0];
  EXPECT_LE(p.size(), 2 * PlotData::kPlotBuckets + 2);
  EXPECT_EQ(p.front().first, 0.0);
  EXPECT_DOUBLE_EQ(p.back().first, 1.0);
  double peak = 0;
  for (std::size_t i = 0; i < p.size(); ++i) {
    peak = std::max(peak, p[i].second);
    if (i) {
      EXPECT_LT(p[i - 1].first, p[i].first);
    }
  }
  EXPECT_EQ(peak, 7.0);
}

TEST(PlotTarget, Parse) {
  std::string error;
  EXPECT_EQ(parse_plot_target("term", error)->kind, PlotTarget::Kind::Terminal);
  EXPECT_EQ(parse_plot_target("a/b.PNG", error)->kind, PlotTarget::Kind::Png);
  EXPECT_EQ(parse_plot_target("x.svg", error)->kind, PlotTarget::Kind::Svg);
  EXPECT_EQ(parse_plot_target("x.pdf", error)->kind, PlotTarget::Kind::Pdf);
  EXPECT_FALSE(parse_plot_target("x.jpg", error));
  EXPECT_NE(error.find("--plot"), std::string::npos);
}

}  // namespace
}  // namespace ringdown::cli
