// The words and files a run's figures end up in: the summary sections on the console
// (figures, expects, ratings, energy balance, the mains caution), the JSON summary (--json)
// and the JUnit XML report of `check` (--junit).
//
// JSON layout (CLI.md "--json"): one object per file, documented in docs/commands.md; the
// schema is ringdown's own. JUnit XML: the format CI dashboards read (one <testsuite> per
// file, one <testcase> per expect; a file that cannot be run is one test case with an
// <error>). Only what those formats need is here; nothing runs the engine.
#pragma once

#include <cstdio>
#include <nlohmann/json.hpp>
#include <string>
#include <vector>

#include "cli/evaluation.hpp"
#include "parser/circuit.hpp"
#include "solver/figures.hpp"

namespace ringdown::cli {

// "154.5 V", "8.1 %" (overshoot and undershoot are fractions printed in %), "1.2 MHz".
std::string figure_text(const FigureCall& call, const solver::FigureValue& value);
// The limit of an expect as a phrase: "< 300 V", "= 1.891 A within 1 %".
std::string limit_text(const Expect& expect);

// Console sections, after the run section of the summary.
void print_evaluation(std::FILE* out, const Evaluation& evaluation);

// The mains caution, several lines ending in '\n'; empty when the run is not hazardous.
std::string caution_text(const SafetyReport& safety);

// JSON pieces.
nlohmann::json evaluation_json(const Evaluation& evaluation);
nlohmann::json safety_json(const SafetyReport& safety, bool accepted);
nlohmann::json diagnostics_json(const Diagnostics& diagnostics);

// JUnit XML.
struct JUnitCase {
  std::string name;       // the expect as written
  std::string classname;  // the file
  double seconds = 0;
  bool failed = false;    // the expect does not hold
  bool error = false;     // could not be evaluated (or the file could not be run)
  std::string message;    // one line
  std::string detail;     // body text
};
struct JUnitSuite {
  std::string name;  // the file
  double seconds = 0;
  std::vector<JUnitCase> cases;
};
std::string junit_xml(const std::vector<JUnitSuite>& suites);
// The one test case of a file that could not be run: an <error> with `why` and the
// diagnostics rendered as its body.
JUnitCase refused_case(const std::string& file, const std::string& why, const Diagnostics& diagnostics,
                       double seconds);

// XML 1.0 text escaping (& < > " '), control characters other than tab, newline and
// carriage return dropped (they are not allowed in XML 1.0).
std::string xml_escape(const std::string& text);

}  // namespace ringdown::cli
