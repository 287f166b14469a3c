// Summary sections, JSON and JUnit XML of a run's figures (see report.hpp).
#include "cli/report.hpp"

#include <algorithm>
#include <cmath>

#include "parser/units.hpp"

namespace ringdown::cli {

namespace {

// Digits of figures on the console: enough to compare with a datasheet (common practice,
// no source); JSON carries the full double.
constexpr int kFigureDigits = 5;

bool is_fraction_figure(const std::string& f) { return f == "overshoot" || f == "undershoot"; }

std::string unit_of(const Unit& u) { return u ? unit_symbol(*u) : std::string(); }

std::string op_text(CompareOp op) {
  switch (op) {
    case CompareOp::Less: return "<";
    case CompareOp::LessEqual: return "<=";
    case CompareOp::Greater: return ">";
    case CompareOp::GreaterEqual: return ">=";
    case CompareOp::Equal: return "=";
  }
  return "?";
}

std::string number_text(double v, const Unit& unit, bool fraction) {
  if (fraction) return format_si(v * 100, "%", kFigureDigits);
  return format_si(v, unit_of(unit), kFigureDigits);
}

std::string position_text(const SourcePosition& w) {
  if (w.line <= 0) return w.file;
  return w.file + ":" + std::to_string(w.line) + ":" + std::to_string(w.column);
}

}  // namespace

std::string figure_text(const FigureCall& call, const solver::FigureValue& value) {
  if (!value.ok) return "error: " + value.error;
  std::string s = number_text(value.value, value.unit, is_fraction_figure(call.function));
  if (!value.note.empty()) s += " (" + value.note + ")";
  return s;
}

std::string limit_text(const Expect& e) {
  const bool fraction = is_fraction_figure(e.figure.function);
  std::string s = op_text(e.op) + " " + number_text(e.value, e.unit, fraction);
  if (e.within) {
    s += " within ";
    s += e.within_relative ? format_si(*e.within * 100, "%", kFigureDigits)
                           : number_text(*e.within, e.unit, fraction);
  }
  return s;
}

void print_evaluation(std::FILE* out, const Evaluation& ev) {
  if (!ev.reports.empty()) {
    std::fprintf(out, "\nFigures\n");
    std::size_t wn = 0, wt = 0;
    for (const auto& r : ev.reports) {
      wn = std::max(wn, r.name.size());
      wt = std::max(wt, r.call->text.size());
    }
    for (const auto& r : ev.reports)
      std::fprintf(out, "  %-*s  %-*s  %s\n", static_cast<int>(wn), r.name.c_str(),
                   static_cast<int>(wt), r.call->text.c_str(), figure_text(*r.call, r.value).c_str());
  }
  if (!ev.expects.empty()) {
    const int failed = ev.failed_expects();
    std::fprintf(out, "\nExpects (%zu, %d failed)\n", ev.expects.size(), failed);
    std::size_t wt = 0;
    for (const auto& e : ev.expects) wt = std::max(wt, e.expect->text.size());
    for (const auto& e : ev.expects)
      std::fprintf(out, "  %s  %-*s  %s\n", e.pass ? "pass" : "FAIL", static_cast<int>(wt),
                   e.expect->text.c_str(), figure_text(e.expect->figure, e.value).c_str());
  }
  if (!ev.ratings.empty()) {
    std::fprintf(out, "\nRatings\n");
    std::size_t wp = 0, wf = 0;
    for (const auto& r : ev.ratings) {
      wp = std::max(wp, r.part.size());
      wf = std::max(wf, r.figure.size());
    }
    for (const auto& r : ev.ratings) {
      const std::string unit = unit_of(r.unit);
      std::string line = r.ok ? format_si(r.value, unit, kFigureDigits) : "not computed";
      line += " of " + format_si(r.rating, unit, kFigureDigits) + " rated";
      if (r.ok) {
        line += r.exceeded ? "  EXCEEDED" : "  ok";
        if (r.instant) line += " (peak at " + format_si(*r.instant, "s") + ")";
      }
      std::fprintf(out, "  %-*s  %-*s  %s\n", static_cast<int>(wp), r.part.c_str(),
                   static_cast<int>(wf), r.figure.c_str(), line.c_str());
    }
  }
  if (ev.energy.computed) {
    std::fprintf(out, "\nEnergy balance\n");
    std::fprintf(out, "  delivered by sources   %s\n", format_si(ev.energy.delivered, "J", kFigureDigits).c_str());
    std::fprintf(out, "  taken by resistances   %s\n", format_si(ev.energy.dissipated, "J", kFigureDigits).c_str());
    std::fprintf(out, "  change of stored       %s\n", format_si(ev.energy.stored_change, "J", kFigureDigits).c_str());
    std::fprintf(out, "  residual               %.2g (relative)\n", ev.energy.residual);
  } else if (!ev.energy.skipped.empty()) {
    std::fprintf(out, "\nEnergy balance\n  not computed: %s\n", ev.energy.skipped.c_str());
  }
}

std::string caution_text(const SafetyReport& s) {
  if (!s.hazardous) return {};
  std::string t = "caution: hazardous voltage in this circuit, above the extra-low-voltage band (" +
                  format_si(s.band.ac_rms, "V") + " AC rms, " + format_si(s.band.dc, "V") +
                  " ripple-free DC; IEC 61140, values from memory; --elv changes the band):\n";
  const std::size_t shown = std::min<std::size_t>(s.points.size(), 5);
  for (std::size_t i = 0; i < shown; ++i) {
    const HazardPoint& h = s.points[i];
    t += "  " + h.name + " reaches " + format_si(h.peak, "V") + " at t = " + format_si(h.instant, "s");
    if (h.over_ac) t += ", " + format_si(h.ac_rms, "V") + " AC rms";
    t += "\n";
  }
  if (s.points.size() > shown)
    t += "  and " + std::to_string(s.points.size() - shown) + " more nodes or sources\n";
  for (const StoredCharge& q : s.stored) {
    t += "  " + q.capacitor + " holds " + format_si(q.voltage, "V") + " (" + format_si(q.energy, "J") +
         ") at the end of the run";
    if (q.bleed_time)
      t += "; it falls below " + format_si(s.band.bleed_level, "V") + " " + format_si(*q.bleed_time, "s") +
           " after the supply is removed";
    else if (!q.note.empty())
      t += "; " + q.note;
    t += "\n";
  }
  if (!s.limitation.empty()) t += "  (" + s.limitation + ")\n";
  t += "  These are results of an idealized linear model: real parts break down, arc and store\n"
       "  charge in ways it does not show. Design, testing and installation must follow local\n"
       "  electrical codes and licensed practice; work on such circuits only if qualified.\n";
  return t;
}

nlohmann::json evaluation_json(const Evaluation& ev) {
  nlohmann::json j;
  auto value_json = [](const FigureCall& call, const solver::FigureValue& v) {
    nlohmann::json o;
    o["figure"] = call.text;
    o["ok"] = v.ok;
    if (v.ok) {
      o["value"] = v.value;
      o["unit"] = v.unit ? unit_symbol(*v.unit) : "";
      if (is_fraction_figure(call.function)) o["percent"] = v.value * 100;
    } else {
      o["error"] = v.error;
    }
    if (!v.note.empty()) o["note"] = v.note;
    return o;
  };
  j["reports"] = nlohmann::json::array();
  for (const auto& r : ev.reports) {
    nlohmann::json o = value_json(*r.call, r.value);
    o["name"] = r.name;
    o["where"] = position_text(r.where);
    j["reports"].push_back(o);
  }
  j["expects"] = nlohmann::json::array();
  for (const auto& e : ev.expects) {
    nlohmann::json o = value_json(e.expect->figure, e.value);
    o["expect"] = e.expect->text;
    o["limit"] = limit_text(*e.expect);
    o["op"] = op_text(e.expect->op);
    o["bound"] = e.expect->value;
    if (e.expect->within) {
      o["within"] = *e.expect->within;
      o["within_relative"] = e.expect->within_relative;
    }
    o["pass"] = e.pass;
    o["where"] = position_text(e.expect->where);
    j["expects"].push_back(o);
  }
  j["ratings"] = nlohmann::json::array();
  for (const auto& r : ev.ratings) {
    nlohmann::json o;
    o["part"] = r.part;
    o["figure"] = r.figure;
    o["ok"] = r.ok;
    if (r.ok) o["value"] = r.value;
    else o["error"] = r.error;
    o["rated"] = r.rating;
    o["unit"] = r.unit ? unit_symbol(*r.unit) : "";
    o["exceeded"] = r.exceeded;
    if (r.instant) o["instant"] = *r.instant;
    j["ratings"].push_back(o);
  }
  nlohmann::json e;
  e["computed"] = ev.energy.computed;
  if (ev.energy.computed) {
    e["delivered"] = ev.energy.delivered;
    e["dissipated"] = ev.energy.dissipated;
    e["stored_change"] = ev.energy.stored_change;
    e["residual"] = ev.energy.residual;
  } else if (!ev.energy.skipped.empty()) {
    e["skipped"] = ev.energy.skipped;
  }
  j["energy_balance"] = e;
  return j;
}

nlohmann::json safety_json(const SafetyReport& s, bool accepted) {
  nlohmann::json j;
  j["hazardous"] = s.hazardous;
  j["band"] = {{"ac_rms", s.band.ac_rms}, {"dc", s.band.dc}, {"bleed_level", s.band.bleed_level},
               {"standard", "IEC 61140 (values from memory)"}};
  j["accepted_mains_risk"] = accepted;
  j["points"] = nlohmann::json::array();
  for (const HazardPoint& h : s.points)
    j["points"].push_back({{"name", h.name}, {"peak", h.peak}, {"instant", h.instant},
                           {"ac_rms", h.ac_rms}, {"over_dc", h.over_dc}, {"over_ac", h.over_ac}});
  j["stored"] = nlohmann::json::array();
  for (const StoredCharge& q : s.stored) {
    nlohmann::json o{{"capacitor", q.capacitor}, {"voltage", q.voltage}, {"energy", q.energy}};
    if (q.bleed_time) o["bleed_time"] = *q.bleed_time;
    if (!q.note.empty()) o["note"] = q.note;
    j["stored"].push_back(o);
  }
  if (!s.limitation.empty()) j["limitation"] = s.limitation;
  if (s.hazardous) j["text"] = caution_text(s);
  return j;
}

nlohmann::json diagnostics_json(const Diagnostics& diagnostics) {
  nlohmann::json a = nlohmann::json::array();
  for (const Diagnostic& d : diagnostics) {
    nlohmann::json o;
    o["severity"] = d.severity == Severity::Error ? "error" : d.severity == Severity::Warning ? "warning" : "note";
    o["message"] = d.message;
    if (!d.hint.empty()) o["hint"] = d.hint;
    if (!d.where.file.empty()) o["file"] = d.where.file;
    if (d.where.line > 0) {
      o["line"] = d.where.line;
      o["column"] = d.where.column;
    }
    a.push_back(o);
  }
  return a;
}

std::string xml_escape(const std::string& text) {
  std::string out;
  out.reserve(text.size());
  for (char ch : text) {
    const auto c = static_cast<unsigned char>(ch);
    switch (ch) {
      case '&': out += "&amp;"; break;
      case '<': out += "&lt;"; break;
      case '>': out += "&gt;"; break;
      case '"': out += "&quot;"; break;
      case '\'': out += "&apos;"; break;
      default:
        if (c < 0x20 && ch != '\t' && ch != '\n' && ch != '\r') break;
        out += ch;
    }
  }
  return out;
}

JUnitCase refused_case(const std::string& file, const std::string& why, const Diagnostics& diagnostics,
                       double seconds) {
  JUnitCase c;
  c.name = "run " + file;
  c.classname = file;
  c.error = true;
  c.message = why;
  for (const Diagnostic& d : diagnostics) c.detail += render(d);
  c.seconds = seconds;
  return c;
}

std::string junit_xml(const std::vector<JUnitSuite>& suites) {
  int tests = 0, failures = 0, errors = 0;
  double seconds = 0;
  for (const auto& s : suites) {
    seconds += s.seconds;
    for (const auto& c : s.cases) {
      ++tests;
      failures += c.failed && !c.error;
      errors += c.error;
    }
  }
  auto num = [](double v) {
    char buf[32];
    std::snprintf(buf, sizeof buf, "%.6f", v);
    return std::string(buf);
  };
  std::string x = "<?xml version=\"1.0\" encoding=\"UTF-8\"?>\n";
  x += "<testsuites name=\"ringdown check\" tests=\"" + std::to_string(tests) + "\" failures=\"" +
       std::to_string(failures) + "\" errors=\"" + std::to_string(errors) + "\" time=\"" + num(seconds) + "\">\n";
  for (const auto& s : suites) {
    int f = 0, e = 0;
    for (const auto& c : s.cases) {
      f += c.failed && !c.error;
      e += c.error;
    }
    x += "  <testsuite name=\"" + xml_escape(s.name) + "\" tests=\"" + std::to_string(s.cases.size()) +
         "\" failures=\"" + std::to_string(f) + "\" errors=\"" + std::to_string(e) + "\" time=\"" +
         num(s.seconds) + "\">\n";
    for (const auto& c : s.cases) {
      x += "    <testcase classname=\"" + xml_escape(c.classname) + "\" name=\"" + xml_escape(c.name) +
           "\" time=\"" + num(c.seconds) + "\"";
      if (!c.failed && !c.error) {
        x += "/>\n";
        continue;
      }
      x += ">\n";
      const char* tag = c.error ? "error" : "failure";
      x += std::string("      <") + tag + " message=\"" + xml_escape(c.message) + "\">" +
           xml_escape(c.detail) + "</" + tag + ">\n";
      x += "    </testcase>\n";
    }
    x += "  </testsuite>\n";
  }
  x += "</testsuites>\n";
  return x;
}

}  // namespace ringdown::cli
