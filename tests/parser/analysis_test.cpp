// Analysis statements (NETLIST.md section 7): transient, frequency, modes,
// record, report, expect, sweep, trials.
#include <gtest/gtest.h>

#include <cmath>

#include "parser/eseries.hpp"
#include "parser_test_util.hpp"

namespace ringdown {
namespace {

using testing::all_messages;
using testing::expect_error;
using testing::expect_warning;
using testing::load;

const char* kCircuit =
    "voltage V1 in gnd step(to=5V)\n"
    "resistor R1 in out 1k\n"
    "capacitor C1 out gnd 1u esr=10m\n"
    "inductor L1 out gnd 1m\n";

std::string with(const std::string& lines) { return std::string(kCircuit) + lines; }

TEST(Analysis, Transient) {
  auto r = load(with("transient until=2m every=200n initial=zero\n"));
  ASSERT_TRUE(r.ok()) << all_messages(r);
  ASSERT_TRUE(r.circuit->transient);
  EXPECT_DOUBLE_EQ(r.circuit->transient->until, 2e-3);
  EXPECT_DOUBLE_EQ(r.circuit->transient->every, 200e-9);
  EXPECT_FALSE(r.circuit->transient->initial_dc);
  auto d = load(with("transient until=1m\n"));
  ASSERT_TRUE(d.ok());
  EXPECT_DOUBLE_EQ(d.circuit->transient->every, 1e-6);  // until/1000
  EXPECT_TRUE(d.circuit->transient->initial_dc);
}

TEST(Analysis, TransientNotWholeWarns) {
  auto r = load(with("transient until=1m every=300u\n"));
  ASSERT_TRUE(r.ok()) << all_messages(r);
  expect_warning(r, 5, "is not a whole number");
  auto exact = load(with("transient until=1m every=100u\n"));  // 10.000000000000002 is whole within 1e-9
  EXPECT_EQ(testing::find_diagnostic(exact, "whole"), nullptr) << all_messages(exact);
}

TEST(Analysis, TransientErrors) {
  expect_error(load(with("transient every=1u\n")), 5, 1, "until=T is required");
  expect_error(load(with("transient until=1V\n")), 5, 17, "is in V (voltage), but a time is in s");
  expect_error(load(with("transient until=1m unitl=2\n")), 5, 20, "unknown attribute 'unitl'",
               "did you mean 'until'?");
  expect_error(load(with("transient until=1m\ntransient until=2m\n")), 6, 1, "a second transient");
  expect_error(load(with("transient until=1m initial=cold\n")), 5, 28, "initial must be dc or zero");
}

TEST(Analysis, Frequency) {
  auto r = load(with("frequency from=10Hz to=10MHz input=V1\n"));
  ASSERT_TRUE(r.ok()) << all_messages(r);
  ASSERT_TRUE(r.circuit->frequency);
  EXPECT_DOUBLE_EQ(r.circuit->frequency->from, 10);
  EXPECT_DOUBLE_EQ(r.circuit->frequency->to, 10e6);
  EXPECT_EQ(r.circuit->frequency->per_decade, 50);
  EXPECT_EQ(r.circuit->frequency->input_part, r.circuit->find_part("V1"));
  expect_error(load(with("frequency from=10Hz to=1k input=R1\n")), 5, 33, "is not a voltage or current source");
  expect_error(load(with("frequency from=10Hz to=1k input=V2\n")), 5, 33, "names no element", "did you mean 'V1'?");
}

TEST(Analysis, Modes) {
  auto r = load(with("modes\n"));
  ASSERT_TRUE(r.ok());
  EXPECT_TRUE(r.circuit->modes);
  expect_error(load(with("modes 3\n")), 5, 1, "modes takes no arguments");
}

TEST(Analysis, Record) {
  auto r = load(with("record out, R1.i, C1.vc, L1.il, C1.p, vx = in - out, i2 = L1.i^2\n"));
  ASSERT_TRUE(r.ok()) << all_messages(r);
  const auto& rec = r.circuit->records;
  ASSERT_EQ(rec.size(), 7u);
  EXPECT_EQ(rec[0].name, "out");
  EXPECT_EQ(rec[0].expr.op, SignalExpr::Op::NodeVoltage);
  EXPECT_EQ(rec[0].expr.index, r.circuit->find_node("out"));
  EXPECT_EQ(rec[1].expr.op, SignalExpr::Op::PartQuantity);
  EXPECT_EQ(rec[1].expr.quantity, Quantity::Current);
  EXPECT_EQ(rec[1].unit, Dimension::ampere());
  EXPECT_EQ(rec[2].expr.quantity, Quantity::CapacitanceVoltage);
  EXPECT_EQ(rec[3].expr.quantity, Quantity::InductanceCurrent);
  EXPECT_EQ(rec[4].unit, Dimension::watt());
  EXPECT_EQ(rec[5].name, "vx");
  EXPECT_EQ(rec[5].expr.op, SignalExpr::Op::Sub);
  EXPECT_EQ(rec[6].expr.op, SignalExpr::Op::Pow);
  EXPECT_EQ(rec[6].unit, Dimension::ampere().pow_half(4));
}

TEST(Analysis, RecordErrorsSuggest) {
  expect_error(load(with("record otu\n")), 5, 8, "unknown node or element 'otu'", "did you mean 'out'?");
  expect_error(load(with("record R2.i\n")), 5, 8, "unknown node or element 'R2.i'", "did you mean 'R1.i'?");
  expect_error(load(with("record R1\n")), 5, 8, "'R1' is an element, not a signal", "R1.v");
  expect_error(load(with("record R1.vc\n")), 5, 8, "has no quantity 'vc'");
  expect_error(load(with("record in - R1.i\n")), 5, 11, "cannot subtract");
}

TEST(Analysis, RecordOptionReplaces) {
  LoadOptions o;
  o.records = {"in", "d = in - out"};
  auto r = load(with("record out\n"), o);
  ASSERT_TRUE(r.ok()) << all_messages(r);
  ASSERT_EQ(r.circuit->records.size(), 2u);
  EXPECT_EQ(r.circuit->records[0].name, "in");
  EXPECT_EQ(r.circuit->records[1].name, "d");
}

TEST(Analysis, Report) {
  auto r = load(with("report vpeak = max(out)\nreport e = energy(R1)\nreport tr = rise(out, lo=20%, hi=80%)\n"
                     "report w = when(out, 2.5V, nth=2, edge=up, from=1u)\nreport a = at(out, 1m)\n"
                     "report s = settle(out, band=1%)\nreport f = ringfreq(out)\nreport q = integral(L1.i^2)\n"
                     "report o = overshoot(out)\nreport sl = slope(out)\nreport pw = power(C1)\n"));
  ASSERT_TRUE(r.ok()) << all_messages(r);
  const auto& rep = r.circuit->reports;
  ASSERT_EQ(rep.size(), 11u);
  EXPECT_EQ(rep[0].name, "vpeak");
  EXPECT_EQ(rep[0].figure.function, "max");
  EXPECT_EQ(rep[0].figure.text, "max(out)");
  EXPECT_EQ(rep[0].figure.unit, Dimension::volt());
  EXPECT_EQ(rep[1].figure.part, r.circuit->find_part("R1"));
  EXPECT_EQ(rep[1].figure.unit, Dimension::joule());
  EXPECT_DOUBLE_EQ(rep[2].figure.args.at("lo"), 0.2);
  EXPECT_DOUBLE_EQ(rep[2].figure.args.at("hi"), 0.8);
  EXPECT_EQ(rep[2].figure.unit, Dimension::second());
  EXPECT_DOUBLE_EQ(rep[3].figure.args.at("level"), 2.5);
  EXPECT_DOUBLE_EQ(rep[3].figure.args.at("nth"), 2);
  EXPECT_DOUBLE_EQ(rep[3].figure.args.at("from"), 1e-6);
  EXPECT_EQ(rep[3].figure.edge, "up");
  EXPECT_DOUBLE_EQ(rep[4].figure.args.at("t"), 1e-3);
  EXPECT_DOUBLE_EQ(rep[5].figure.args.at("band"), 0.01);
  EXPECT_EQ(rep[6].figure.unit, Dimension::hertz());
  EXPECT_EQ(rep[7].figure.unit, *Dimension::ampere().pow_half(4) * Dimension::second());
  EXPECT_EQ(rep[8].figure.unit, Dimension::none());
  EXPECT_EQ(rep[9].figure.unit, Dimension::volt() / Dimension::second());
  EXPECT_EQ(rep[10].figure.unit, Dimension::watt());
}

TEST(Analysis, ReportErrors) {
  expect_error(load(with("report x = maxx(out)\n")), 5, 12, "unknown figure 'maxx'", "did you mean 'max'?");
  expect_error(load(with("report x = rise(out, low=10%)\n")), 5, 22, "unknown argument 'low' of rise(); valid: from, to, lo, hi");
  expect_error(load(with("report x = energy(R9)\n")), 5, 19, "no element 'R9'", "did you mean 'R1'?");
  expect_error(load(with("report x = max(out)\nreport x = min(out)\n")), 6, 8, "a second report named 'x'");
  expect_error(load(with("report x = when(out, 1A)\n")), 5, 22, "is in A (current), but the signal is in V");
}

TEST(Analysis, Expect) {
  auto r = load(with("expect max(out) < 300V\nexpect overshoot(out) < 10%\nexpect final(out) = 5V within 1%\n"
                     "expect energy(R1) <= 1.25mJ\nexpect tmax(out) >= 1u\nexpect final(out) = 5V within 10mV\n"));
  ASSERT_TRUE(r.ok()) << all_messages(r);
  const auto& e = r.circuit->expects;
  ASSERT_EQ(e.size(), 6u);
  EXPECT_EQ(e[0].op, CompareOp::Less);
  EXPECT_DOUBLE_EQ(e[0].value, 300);
  EXPECT_EQ(e[0].text, "max(out) < 300V");
  EXPECT_DOUBLE_EQ(e[1].value, 0.1);
  EXPECT_EQ(e[2].op, CompareOp::Equal);
  EXPECT_TRUE(e[2].within_relative);
  EXPECT_DOUBLE_EQ(*e[2].within, 0.01);
  EXPECT_EQ(e[3].op, CompareOp::LessEqual);
  EXPECT_EQ(e[4].op, CompareOp::GreaterEqual);
  EXPECT_FALSE(e[5].within_relative);
  EXPECT_DOUBLE_EQ(*e[5].within, 0.01);
}

TEST(Analysis, ExpectErrors) {
  expect_error(load(with("expect max(out) < 3A\n")), 5, 19, "max(out) is in V (voltage), but 3A is in A");
  expect_error(load(with("expect max(out) = 3V\n")), 5, 1, "needs a tolerance", "within");
  expect_error(load(with("expect max(out) < 3V within 1%\n")), 5, 29, "'within' goes with '=' only");
  expect_error(load(with("expect max(nowhere) < 3V\n")), 5, 12, "unknown node or element 'nowhere'");
  expect_error(load(with("expect final(out) = 5V within 1A\n")), 5, 31, "the tolerance is in A");
  expect_error(load(with("expect max(out) 3V\n")), 5, 17, "expected a comparison");
}

TEST(Analysis, SweepLists) {
  auto r = load(with("Rs = 1k\nsweep Rs = (10, 22, 47)\nsweep Cx = linear(1n, 5n, 5)\nsweep Lx = geometric(1u, 1m, 4)\n"
                     "sweep Ry = e12(10, 100)\n"));
  ASSERT_TRUE(r.ok()) << all_messages(r);
  const auto& s = r.circuit->sweeps;
  ASSERT_EQ(s.size(), 4u);
  EXPECT_EQ(s[0].parameter, "Rs");
  EXPECT_EQ(s[0].values, (std::vector<double>{10, 22, 47}));
  EXPECT_EQ(s[0].text, "(10, 22, 47)");
  ASSERT_EQ(s[1].values.size(), 5u);
  EXPECT_NEAR(s[1].values[2], 3e-9, 1e-24);
  ASSERT_EQ(s[2].values.size(), 4u);
  EXPECT_NEAR(s[2].values[1], 1e-5, 1e-20);  // ratio 10
  EXPECT_DOUBLE_EQ(s[2].values[3], 1e-3);
  // IEC 60063 E12 between 10 and 100, both bounds on the series.
  EXPECT_EQ(s[3].values, (std::vector<double>{10, 12, 15, 18, 22, 27, 33, 39, 47, 56, 68, 82, 100}));
  // A parameter that only a sweep defines takes the first value.
  bool found = false;
  for (const Parameter& p : r.circuit->parameters) found |= p.name == "Cx" && std::fabs(p.value - 1e-9) < 1e-21;
  EXPECT_TRUE(found);
}

TEST(Analysis, SweepErrors) {
  expect_error(load(with("sweep R = e7(1, 10)\n")), 5, 11, "a sweep list is");
  expect_error(load(with("sweep R = (1V, 2A)\n")), 5, 16, "sweep values in V");
  expect_error(load(with("sweep R = linear(1, 2, 1)\n")), 5, 24, "must be a whole number >= 2");
  expect_error(load(with("sweep R = (1, 2)\nsweep R = (3, 4)\n")), 6, 7, "swept twice");
}

TEST(Analysis, PreferredSeries) {
  // IEC 60063 (from memory): E6 = 1.0 1.5 2.2 3.3 4.7 6.8.
  EXPECT_EQ(preferred_values(6, 1, 10), (std::vector<double>{1, 1.5, 2.2, 3.3, 4.7, 6.8, 10}));
  EXPECT_EQ(preferred_series(24)->size(), 24u);
  EXPECT_EQ(preferred_values(24, 4.5, 5.5), (std::vector<double>{4.7, 5.1}));
  // IEC 60063 E96: each value is 10^(k/96) rounded to 3 significant figures.
  const auto& e96 = *preferred_series(96);
  ASSERT_EQ(e96.size(), 96u);
  for (int k = 0; k < 96; ++k) {
    EXPECT_NEAR(e96[k], std::round(100 * std::pow(10.0, k / 96.0)) / 100, 1e-12) << k;
  }
  auto v = preferred_values(96, 1000, 1100);
  EXPECT_EQ(v, (std::vector<double>{1000, 1020, 1050, 1070, 1100}));
  EXPECT_TRUE(preferred_values(12, 1.3, 1.4).empty());
}

TEST(Analysis, Trials) {
  auto r = load(with("trials runs=200 seed=7 spread=normal yield=99%\n"));
  ASSERT_TRUE(r.ok()) << all_messages(r);
  ASSERT_TRUE(r.circuit->trials);
  EXPECT_EQ(r.circuit->trials->runs, 200);
  EXPECT_EQ(r.circuit->trials->seed, 7u);
  EXPECT_EQ(r.circuit->trials->spread, Spread::Normal);
  EXPECT_DOUBLE_EQ(r.circuit->trials->yield, 0.99);
  auto d = load(with("trials runs=10\n"));
  ASSERT_TRUE(d.ok());
  EXPECT_EQ(d.circuit->trials->spread, Spread::Uniform);
  EXPECT_DOUBLE_EQ(d.circuit->trials->yield, 1.0);
  expect_error(load(with("trials seed=1\n")), 5, 1, "runs=N is required");
  expect_error(load(with("trials runs=2.5\n")), 5, 13, "must be a whole number >= 1");
  expect_error(load(with("trials runs=5 spread=gauss\n")), 5, 22, "spread must be uniform, normal or corners");
}

}  // namespace
}  // namespace ringdown
