// A small builder that fills a flat Circuit by hand for the mna and solver
// tests, the way the parser's elaboration would: one Part per element line,
// hidden parts (esr, dcr, rpar) as ordinary elements with internal nodes named
// "<part>#<k>", each line at its own SourcePosition (file "test.rlc", line =
// statement number) so diagnostics can be checked for position.
// It does not parse text and checks nothing.
#pragma once

#include <string>
#include <utility>
#include <vector>

#include "parser/circuit.hpp"
#include "parser/waveform.hpp"

namespace ringdown::mna_testing {

class CircuitBuilder {
 public:
  CircuitBuilder() {
    circuit_.file = "test.rlc";
    circuit_.nodes.push_back(Node{"gnd", false, {}});
  }

  // Index of a node by name, created on first use ("gnd" is 0).
  int node(const std::string& name) {
    const int found = circuit_.find_node(name);
    if (found >= 0) return found;
    circuit_.nodes.push_back(Node{name, name.find('#') != std::string::npos, position()});
    return static_cast<int>(circuit_.nodes.size()) - 1;
  }

  int resistor(const std::string& name, const std::string& a, const std::string& b, double ohm) {
    return simple(ElementKind::Resistor, name, a, b, ohm);
  }
  // esr > 0 adds a hidden series resistance C1.esr between the capacitance and b.
  int capacitor(const std::string& name, const std::string& a, const std::string& b, double farad,
                double esr = 0) {
    if (esr <= 0) return simple(ElementKind::Capacitor, name, a, b, farad);
    const int part = begin_part(ElementKind::Capacitor, name, a, b);
    const std::string mid = name + "#1";
    const int c = add(ElementKind::Capacitor, name, a, mid, farad, part, false);
    add(ElementKind::Resistor, name + ".esr", mid, b, esr, part, true);
    set_main(part, c, {c});
    return part;
  }
  // dcr > 0: hidden series resistance L1.dcr; rpar > 0: hidden L1.rpar across a-b.
  int inductor(const std::string& name, const std::string& a, const std::string& b, double henry,
               double dcr = 0, double rpar = 0) {
    const int part = begin_part(ElementKind::Inductor, name, a, b);
    const std::string end = dcr > 0 ? name + "#1" : b;
    const int l = add(ElementKind::Inductor, name, a, end, henry, part, false);
    std::vector<int> terminal{l};
    if (dcr > 0) add(ElementKind::Resistor, name + ".dcr", end, b, dcr, part, true);
    if (rpar > 0) terminal.push_back(add(ElementKind::Resistor, name + ".rpar", a, b, rpar, part, true));
    set_main(part, l, terminal);
    return part;
  }
  int voltage(const std::string& name, const std::string& a, const std::string& b, WaveformPtr w) {
    const int part = simple(ElementKind::VoltageSource, name, a, b, 0);
    last().waveform = std::move(w);
    return part;
  }
  int voltage(const std::string& name, const std::string& a, const std::string& b, double volts) {
    return voltage(name, a, b, make_constant(volts));
  }
  int current(const std::string& name, const std::string& a, const std::string& b, WaveformPtr w) {
    const int part = simple(ElementKind::CurrentSource, name, a, b, 0);
    last().waveform = std::move(w);
    return part;
  }
  int current(const std::string& name, const std::string& a, const std::string& b, double amps) {
    return current(name, a, b, make_constant(amps));
  }
  int vcvs(const std::string& name, const std::string& a, const std::string& b,
           const std::string& cp, const std::string& cn, double gain) {
    const int part = simple(ElementKind::Vcvs, name, a, b, gain);
    last().control_p = node(cp);
    last().control_n = node(cn);
    return part;
  }
  int vccs(const std::string& name, const std::string& a, const std::string& b,
           const std::string& cp, const std::string& cn, double gain) {
    const int part = simple(ElementKind::Vccs, name, a, b, gain);
    last().control_p = node(cp);
    last().control_n = node(cn);
    return part;
  }
  // `through` names an element already added (its main element).
  int ccvs(const std::string& name, const std::string& a, const std::string& b,
           const std::string& through, double gain) {
    const int part = simple(ElementKind::Ccvs, name, a, b, gain);
    last().through = circuit_.find_element(through);
    return part;
  }
  int cccs(const std::string& name, const std::string& a, const std::string& b,
           const std::string& through, double gain) {
    const int part = simple(ElementKind::Cccs, name, a, b, gain);
    last().through = circuit_.find_element(through);
    return part;
  }
  int switch_(const std::string& name, const std::string& a, const std::string& b, WaveformPtr gate,
              double closed = 1e-3, double open = 1e9) {
    const int part = simple(ElementKind::Switch, name, a, b, 0);
    last().waveform = std::move(gate);
    last().closed = closed;
    last().open = open;
    return part;
  }
  void couple(const std::string& name, const std::vector<std::string>& inductors, double k) {
    Coupling c;
    c.name = name;
    c.k = k;
    c.where = position();
    next_line();
    for (const auto& l : inductors) c.inductors.push_back(circuit_.find_element(l));
    circuit_.couplings.push_back(std::move(c));
  }

  Element& last() { return circuit_.elements.back(); }
  Circuit& circuit() { return circuit_; }
  int element(const std::string& name) const { return circuit_.find_element(name); }
  int part(const std::string& name) const { return circuit_.find_part(name); }

 private:
  SourcePosition position() const {
    SourcePosition p;
    p.file = circuit_.file;
    p.line = line_;
    p.column = 1;
    p.source_line = "line " + std::to_string(line_);
    return p;
  }
  void next_line() { ++line_; }

  int begin_part(ElementKind kind, const std::string& name, const std::string& a,
                 const std::string& b) {
    Part p;
    p.name = name;
    p.kind = kind;
    p.a = node(a);
    p.b = node(b);
    p.where = position();
    circuit_.parts.push_back(std::move(p));
    return static_cast<int>(circuit_.parts.size()) - 1;
  }
  int add(ElementKind kind, const std::string& name, const std::string& a, const std::string& b,
          double value, int part, bool hidden) {
    Element e;
    e.kind = kind;
    e.name = name;
    e.a = node(a);
    e.b = node(b);
    e.value = value;
    e.part = part;
    e.hidden = hidden;
    e.where = circuit_.parts[static_cast<std::size_t>(part)].where;
    circuit_.elements.push_back(std::move(e));
    const int index = static_cast<int>(circuit_.elements.size()) - 1;
    circuit_.parts[static_cast<std::size_t>(part)].elements.push_back(index);
    return index;
  }
  void set_main(int part, int main, std::vector<int> terminal) {
    auto& p = circuit_.parts[static_cast<std::size_t>(part)];
    p.main = main;
    p.terminal = std::move(terminal);
    next_line();
  }
  int simple(ElementKind kind, const std::string& name, const std::string& a, const std::string& b,
             double value) {
    const int part = begin_part(kind, name, a, b);
    const int e = add(kind, name, a, b, value, part, false);
    set_main(part, e, {e});
    return part;
  }

  Circuit circuit_;
  int line_ = 1;
};

}  // namespace ringdown::mna_testing
