// Parse once, elaborate many times (parser/load.hpp: parse_text, parse_file, elaborate; what
// the sweep runner does for each point): one ParsedSource elaborated with various --set
// values gives the same circuits and diagnostics as loading the text afresh each time, also
// from several threads at once; syntax errors and unreadable files are reported the same way
// by both paths; includes are read once, at parse time, samples() files at each elaboration.
//
// Circuits are compared by a fingerprint: every diagnostic rendered (position, caret, hint)
// and the circuit's nodes, elements (values printed to 17 digits, waveforms sampled),
// parts, parameters, records, reports, expects, sweeps and warnings. Not tested here: what
// the sweep runner does with the points (tests/cli).
#include <gtest/gtest.h>

#include <cstdio>
#include <filesystem>
#include <fstream>
#include <string>
#include <thread>
#include <vector>

#include "parser_test_util.hpp"

namespace ringdown {
namespace {

namespace fs = std::filesystem;
using testing::all_messages;

std::string g17(double v) {
  char buf[40];
  std::snprintf(buf, sizeof buf, "%.17g", v);
  return buf;
}

std::string position(const SourcePosition& p) {
  return p.file + ":" + std::to_string(p.line) + ":" + std::to_string(p.column) + "+" +
         std::to_string(p.length);
}

std::string fingerprint(const LoadResult& r) {
  std::string s;
  for (const Diagnostic& d : r.diagnostics)
    s += (d.severity == Severity::Error ? "E " : d.severity == Severity::Warning ? "W " : "N ") + render(d);
  if (!r.circuit) return s + "no circuit\n";
  const Circuit& c = *r.circuit;
  s += "title " + c.title + " file " + c.file + "\n";
  for (const Node& n : c.nodes) s += "node " + n.name + (n.hidden ? " hidden " : " ") + position(n.where) + "\n";
  for (const Element& e : c.elements) {
    s += std::string("element ") + kind_name(e.kind) + " " + e.name + " " + std::to_string(e.a) + " " +
         std::to_string(e.b) + " " + g17(e.value) + " part " + std::to_string(e.part) + " " + position(e.where);
    if (e.v0) s += " v0 " + g17(*e.v0);
    if (e.i0) s += " i0 " + g17(*e.i0);
    if (e.waveform) {
      s += " waveform " + e.waveform->describe();
      for (double t : {0.0, 0.4e-3, 1.5e-3, 3e-3}) s += " " + g17(e.waveform->value(t));
    }
    s += "\n";
  }
  for (const Part& p : c.parts) {
    s += "part " + p.name + " main " + std::to_string(p.main) + " " + position(p.where);
    if (p.tol) s += " tol " + g17(*p.tol);
    s += "\n";
  }
  for (const Parameter& p : c.parameters)
    s += "parameter " + p.name + " = " + g17(p.value) + " '" + p.text + "' " + position(p.where) + "\n";
  for (const Signal& sig : c.records) s += "record " + sig.name + " " + position(sig.where) + "\n";
  for (const Report& rep : c.reports) s += "report " + rep.name + " " + rep.figure.text + "\n";
  for (const Expect& x : c.expects) s += "expect " + x.text + " " + g17(x.value) + "\n";
  for (const SweepRequest& w : c.sweeps) {
    s += "sweep " + w.parameter + " '" + w.text + "' " + position(w.where);
    for (double v : w.values) s += " " + g17(v);
    s += "\n";
  }
  if (c.transient) s += "transient " + g17(c.transient->until) + " " + g17(c.transient->every) + "\n";
  for (const Diagnostic& w : c.warnings) s += "warning " + render(w);
  return s;
}

// Parameters, a derived parameter, a block with a default taken from a global, a waveform
// built from parameters, a sweep, records, a report and an expect.
const char* kCircuit =
    "title \"parse once\"\n"
    "R = 1k\n"
    "C = 100nF\n"
    "tau = (R * C)\n"
    "block Section (a, b) r=R c=C\n"
    "  resistor Rs a b r\n"
    "  capacitor Cs b gnd c\n"
    "end\n"
    "voltage V1 in gnd pulse(low=0, high=1V, period=10ms, start=(tau / 10), width=(tau * 2), count=1)\n"
    "resistor R1 in mid R tol=5%\n"
    "use Section S1 (mid, out) c=(C / 2)\n"
    "resistor Rload out gnd 10k\n"
    "sweep R = (1k, 2.2k, 4.7k)\n"
    "transient until=5ms every=10us\n"
    "record out, R1.i\n"
    "report peak_out = max(out)\n"
    "expect max(out) < 2V\n";

LoadOptions set(std::vector<std::pair<std::string, std::string>> overrides,
                std::vector<std::string> records = {}) {
  LoadOptions o;
  o.overrides = std::move(overrides);
  o.records = std::move(records);
  return o;
}

struct OptionSet {
  LoadOptions options;
  bool ok;  // loads without error
};

const std::vector<OptionSet>& option_sets() {
  static const std::vector<OptionSet> sets = {
      {set({}), true},
      {set({{"R", "2.2k"}}), true},
      {set({{"R", "4.7kOhm"}, {"C", "47nF"}}), true},
      {set({{"C", "(2 * 22nF)"}}), true},
      {set({{"R", "1V"}}), false},         // unit error, reported where the file uses R
      {set({{"R", "4.7k +"}}), false},     // a syntax error inside the --set value
      {set({{"Rx", "1k"}}), false},        // no such parameter, with a suggestion
      {set({{"R", " "}}), false},          // empty value
      {set({{"R", "(1k, 10k)"}}), true},   // a list: a sweep from the command line
      {set({}, {"out"}), true},
      {set({}, {"nowhere"}), false},       // --record of an unknown signal
  };
  return sets;
}

TEST(ParsedSource, EachElaborationEqualsAFreshLoad) {
  // The reference is load_text, which reads and parses the text again for every call;
  // the parsed source is elaborated over and over, in two passes over the option sets,
  // so anything one elaboration left behind in it would show in a later one.
  const auto parsed = parse_text(kCircuit, "test.rlc");
  ASSERT_FALSE(parsed->has_errors());
  EXPECT_EQ(parsed->file_name(), "test.rlc");
  for (int pass = 0; pass < 2; ++pass) {
    for (const OptionSet& o : option_sets()) {
      const LoadResult fresh = load_text(kCircuit, "test.rlc", o.options);
      const LoadResult again = elaborate(*parsed, o.options);
      EXPECT_EQ(again.ok(), o.ok) << all_messages(again);
      EXPECT_EQ(fingerprint(again), fingerprint(fresh));
    }
  }
}

TEST(ParsedSource, OverrideEqualsTheValueWrittenInTheFile) {
  // An override replaces the parameter's definition (NETLIST.md, --set): the element values
  // must be those of the same file with the value written in it. Derived values checked by
  // hand: tau = R C, the pulse at tau/10 (common practice, no source).
  const auto parsed = parse_text(kCircuit, "test.rlc");
  for (const std::string& value : {std::string("2.2k"), std::string("4.7kOhm"), std::string("(3 * 1k)")}) {
    std::string edited = kCircuit;
    edited.replace(edited.find("R = 1k"), 6, "R = " + value);
    const LoadResult written = load_text(edited, "test.rlc");
    const LoadResult overridden = elaborate(*parsed, set({{"R", value}}));
    ASSERT_TRUE(written.ok()) << all_messages(written);
    ASSERT_TRUE(overridden.ok()) << all_messages(overridden);
    ASSERT_EQ(written.circuit->elements.size(), overridden.circuit->elements.size());
    for (std::size_t k = 0; k < written.circuit->elements.size(); ++k) {
      const Element& a = written.circuit->elements[k];
      const Element& b = overridden.circuit->elements[k];
      EXPECT_EQ(a.name, b.name);
      EXPECT_EQ(a.value, b.value) << a.name;
      if (a.waveform) {
        EXPECT_EQ(a.waveform->value(0.4e-3), b.waveform->value(0.4e-3)) << a.name;
      }
    }
  }
  const LoadResult r = elaborate(*parsed, set({{"R", "2.2k"}}));
  ASSERT_TRUE(r.ok());
  EXPECT_DOUBLE_EQ(testing::element(*r.circuit, "R1").value, 2200);
  EXPECT_DOUBLE_EQ(testing::element(*r.circuit, "S1.Rs").value, 2200);  // the block default r=R
  EXPECT_DOUBLE_EQ(testing::element(*r.circuit, "S1.Cs").value, 50e-9);
  // pulse from 0 to 1 V at tau/10 = 22 us, width 2 tau = 440 us: 1 V at 0.4 ms.
  EXPECT_DOUBLE_EQ(testing::element(*r.circuit, "V1").waveform->value(0.4e-3), 1.0);
}

TEST(ParsedSource, BadSetValuesAreReportedOnTheCommandLine) {
  // The positions of --set problems: the value's own text, line 0 (no file line).
  const auto parsed = parse_text(kCircuit, "test.rlc");
  const LoadResult syntax = elaborate(*parsed, set({{"R", "4.7k +"}}));
  const Diagnostic* d = testing::find_diagnostic(syntax, "--set R:");
  ASSERT_NE(d, nullptr) << all_messages(syntax);
  EXPECT_EQ(d->where.file, "--set");
  EXPECT_EQ(d->where.line, 0);
  EXPECT_EQ(d->where.source_line, "R=4.7k +");
  EXPECT_EQ(render(*d), render(*testing::find_diagnostic(load_text(kCircuit, "test.rlc", set({{"R", "4.7k +"}})), "--set R:")));

  const LoadResult unknown = elaborate(*parsed, set({{"Rx", "1k"}}));
  d = testing::find_diagnostic(unknown, "there is no parameter 'Rx'");
  ASSERT_NE(d, nullptr) << all_messages(unknown);
  EXPECT_EQ(d->where.file, "--set");
  EXPECT_EQ(d->where.column, 1);
  EXPECT_EQ(d->where.length, 2);
  EXPECT_NE(d->hint.find("did you mean 'R'?"), std::string::npos) << d->hint;

  // A unit error in an override is shown where the file uses the value (line 10: R1).
  const LoadResult unit = elaborate(*parsed, set({{"R", "1V"}}));
  testing::expect_error(unit, 10, 20, "resistor R1 value is in V (voltage), but a resistance is in Ohm",
                        "(set on the command line)");
  // And the next elaboration of the same source is clean again.
  EXPECT_TRUE(elaborate(*parsed, set({{"R", "1k"}})).ok());
}

TEST(ParsedSource, ConcurrentElaborationsAreIdentical) {
  // Four threads elaborate one ParsedSource at once, each running through every option set
  // several times; each result must equal the serial one (no shared mutable state).
  const auto parsed = parse_text(kCircuit, "test.rlc");
  const std::vector<OptionSet>& sets = option_sets();
  std::vector<std::string> serial;
  for (const OptionSet& o : sets) serial.push_back(fingerprint(elaborate(*parsed, o.options)));
  constexpr int kThreads = 4, kRounds = 8;
  std::vector<std::vector<std::string>> got(kThreads);
  std::vector<std::thread> threads;
  for (int t = 0; t < kThreads; ++t) {
    threads.emplace_back([&, t] {
      for (int round = 0; round < kRounds; ++round)
        for (std::size_t k = 0; k < sets.size(); ++k) {
          const std::size_t i = (k + static_cast<std::size_t>(t)) % sets.size();  // different orders
          got[static_cast<std::size_t>(t)].push_back(std::to_string(i) + "\n" + fingerprint(elaborate(*parsed, sets[i].options)));
        }
    });
  }
  for (std::thread& th : threads) th.join();
  for (int t = 0; t < kThreads; ++t) {
    ASSERT_EQ(got[static_cast<std::size_t>(t)].size(), sets.size() * kRounds);
    for (const std::string& g : got[static_cast<std::size_t>(t)]) {
      const std::size_t i = std::stoul(g.substr(0, g.find('\n')));
      EXPECT_EQ(g.substr(g.find('\n') + 1), serial[i]) << "thread " << t << ", option set " << i;
    }
  }
}

TEST(ParsedSource, SyntaxErrorsAreTheSameByBothPaths) {
  // Pass-1 problems (an unparenthesised expression, an unclosed block, a missing include)
  // interleaved in file order with elaboration problems (a bad unit).
  const std::string text =
      "R = 1k\n"
      "resistor R1 a gnd R*2\n"
      "capacitor C1 a gnd 1V\n"
      "include \"missing_include.rlc\"\n"
      "block B (x)\n"
      "  resistor Rb x gnd 1k\n";
  const auto parsed = parse_text(text, "test.rlc");
  EXPECT_TRUE(parsed->has_errors());
  for (const LoadOptions& o : {set({}), set({{"R", "2k"}}), set({{"R", "1V"}})}) {
    const LoadResult fresh = load_text(text, "test.rlc", o);
    const LoadResult again = elaborate(*parsed, o);
    EXPECT_FALSE(again.ok());
    EXPECT_EQ(fingerprint(again), fingerprint(fresh));
  }
  const LoadResult r = elaborate(*parsed);
  testing::expect_error(r, 2, 19, "an expression as a value must be in parentheses", "write (R*2)");
  testing::expect_error(r, 3, 20, "is in V (voltage)");
  testing::expect_error(r, 4, 9, "cannot read included file");
  testing::expect_error(r, 5, 1, "block 'B' has no 'end'");
  // In file order: line 2 (pass 1) before line 3 (elaboration) before line 4 (pass 1).
  ASSERT_GE(r.diagnostics.size(), 4U) << all_messages(r);
  EXPECT_EQ(r.diagnostics[0].where.line, 2);
  EXPECT_EQ(r.diagnostics[1].where.line, 3);
  EXPECT_EQ(r.diagnostics[2].where.line, 4);
}

class ParsedFile : public ::testing::Test {
 protected:
  void SetUp() override {
    dir_ = fs::temp_directory_path() /
           ("ringdown_ps_" + std::string(::testing::UnitTest::GetInstance()->current_test_info()->name()));
    fs::remove_all(dir_);
    fs::create_directories(dir_);
  }
  void TearDown() override { fs::remove_all(dir_); }
  std::string write(const std::string& name, const std::string& text) {
    std::ofstream out(dir_ / name);
    out << text;
    return (dir_ / name).string();
  }
  fs::path dir_;
};

TEST_F(ParsedFile, UnreadableFilesAreTheSameByBothPaths) {
  for (const std::string& path : {(dir_ / "nope.rlc").string(), dir_.string()}) {
    const auto parsed = parse_file(path);
    EXPECT_TRUE(parsed->has_errors());
    EXPECT_EQ(fingerprint(elaborate(*parsed)), fingerprint(load_file(path)));
    EXPECT_EQ(fingerprint(elaborate(*parsed, set({{"R", "1k"}}))), fingerprint(load_file(path, set({{"R", "1k"}}))));
  }
}

TEST_F(ParsedFile, IncludesAreReadOnceSamplesAtEachElaboration) {
  // Documented in load.hpp: the file and its includes are read by parse_file; a samples()
  // CSV is read by every elaboration. Linear interpolation between samples (the samples()
  // waveform, docs/language.md).
  write("parts.rlc", "Rb = 2k\n");
  write("scope.csv", "t,v\n0,0\n1e-3,2\n2e-3,4\n");
  const std::string top = write("top.rlc",
                                "include \"parts.rlc\"\n"
                                "voltage V1 a gnd samples(\"scope.csv\", time=1, value=\"v\", scale=k)\n"
                                "k = 1\n"
                                "resistor R1 a gnd Rb\n");
  const auto parsed = parse_file(top);
  ASSERT_FALSE(parsed->has_errors());
  LoadResult r = elaborate(*parsed, set({{"k", "0.5"}}));
  ASSERT_TRUE(r.ok()) << all_messages(r);
  EXPECT_EQ(fingerprint(r), fingerprint(load_file(top, set({{"k", "0.5"}}))));
  EXPECT_DOUBLE_EQ(testing::element(*r.circuit, "R1").value, 2000);
  EXPECT_DOUBLE_EQ(testing::element(*r.circuit, "V1").waveform->value(1.5e-3), 1.5);  // 3 V * 0.5

  write("parts.rlc", "Rb = 3k\n");
  write("scope.csv", "t,v\n0,0\n1e-3,4\n2e-3,8\n");
  r = elaborate(*parsed, set({{"k", "0.5"}}));
  ASSERT_TRUE(r.ok()) << all_messages(r);
  EXPECT_DOUBLE_EQ(testing::element(*r.circuit, "R1").value, 2000);                  // include kept
  EXPECT_DOUBLE_EQ(testing::element(*r.circuit, "V1").waveform->value(1.5e-3), 3.0);  // CSV re-read
}

}  // namespace
}  // namespace ringdown
