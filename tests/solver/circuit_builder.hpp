// A small hand builder of elaborated Circuits for the solver tests: one part
// per element, no hidden parts, no parser. Lets the solver tests state the
// network in a few lines without depending on the language front end.
#pragma once

#include <optional>
#include <string>
#include <vector>

#include <gtest/gtest.h>

#include "parser/circuit.hpp"
#include "solver/transient.hpp"
#include "parser/waveform.hpp"

namespace ringdown::test {

class CircuitBuilder {
 public:
  CircuitBuilder() {
    c.nodes.push_back(Node{"gnd", false, {}});
    TransientRequest t;
    t.until = 1;
    t.every = 1e-3;
    c.transient = t;
  }

  int node(const std::string& name) {
    if (name == "gnd") return kGround;
    const int k = c.find_node(name);
    if (k >= 0) return k;
    c.nodes.push_back(Node{name, false, {}});
    return static_cast<int>(c.nodes.size()) - 1;
  }

  int resistor(const std::string& name, const std::string& a, const std::string& b, double r) {
    return add(ElementKind::Resistor, name, a, b, r);
  }
  int capacitor(const std::string& name, const std::string& a, const std::string& b, double cap,
                std::optional<double> v0 = std::nullopt) {
    const int p = add(ElementKind::Capacitor, name, a, b, cap);
    element_of(p).v0 = v0;
    return p;
  }
  int inductor(const std::string& name, const std::string& a, const std::string& b, double l,
               std::optional<double> i0 = std::nullopt) {
    const int p = add(ElementKind::Inductor, name, a, b, l);
    element_of(p).i0 = i0;
    return p;
  }
  int voltage(const std::string& name, const std::string& a, const std::string& b, WaveformPtr w) {
    const int p = add(ElementKind::VoltageSource, name, a, b, 0);
    element_of(p).waveform = std::move(w);
    return p;
  }
  int current(const std::string& name, const std::string& a, const std::string& b, WaveformPtr w) {
    const int p = add(ElementKind::CurrentSource, name, a, b, 0);
    element_of(p).waveform = std::move(w);
    return p;
  }
  int switch_(const std::string& name, const std::string& a, const std::string& b, WaveformPtr gate,
              double closed, double open) {
    const int p = add(ElementKind::Switch, name, a, b, 0);
    Element& e = element_of(p);
    e.waveform = std::move(gate);
    e.closed = closed;
    e.open = open;
    return p;
  }
  void couple(const std::string& name, std::vector<int> inductor_parts, double k) {
    Coupling cp;
    cp.name = name;
    for (int p : inductor_parts) cp.inductors.push_back(c.parts[static_cast<std::size_t>(p)].main);
    cp.k = k;
    c.couplings.push_back(cp);
  }

  Element& element_of(int part) {
    return c.elements[static_cast<std::size_t>(c.parts[static_cast<std::size_t>(part)].main)];
  }

  // Signals.
  Signal v(const std::string& node_name) {
    Signal s;
    s.name = node_name;
    s.expr.op = SignalExpr::Op::NodeVoltage;
    s.expr.index = c.find_node(node_name);
    return s;
  }
  Signal q(int part, Quantity quantity) {
    Signal s;
    s.name = c.parts[static_cast<std::size_t>(part)].name;
    s.expr.op = SignalExpr::Op::PartQuantity;
    s.expr.index = part;
    s.expr.quantity = quantity;
    return s;
  }

  Circuit c;

 private:
  int add(ElementKind kind, const std::string& name, const std::string& a, const std::string& b,
          double value) {
    Element e;
    e.kind = kind;
    e.name = name;
    e.a = node(a);
    e.b = node(b);
    e.value = value;
    const int ei = static_cast<int>(c.elements.size());
    const int pi = static_cast<int>(c.parts.size());
    e.part = pi;
    c.elements.push_back(e);
    Part p;
    p.name = name;
    p.kind = kind;
    p.a = e.a;
    p.b = e.b;
    p.main = ei;
    p.elements = {ei};
    p.terminal = {ei};
    c.parts.push_back(p);
    return pi;
  }
};

// Runs the builder's circuit from 0 to `until` with output step `every`;
// any error diagnostic or a non-Ok status fails the calling test.
inline solver::SampledRun run(const CircuitBuilder& b, const std::vector<Signal>& signals,
                              double until, double every, bool dc = true) {
  solver::TransientOptions opt;
  opt.until = until;
  opt.every = every;
  opt.initial_dc = dc;
  Diagnostics d;
  solver::SampledRun r = solver::run_transient_sampled(b.c, signals, opt, d);
  for (const auto& x : d)
    if (x.severity == Severity::Error) ADD_FAILURE() << "diagnostic: " << x.message;
  EXPECT_EQ(r.summary.status, solver::Status::Ok);
  return r;
}

}  // namespace ringdown::test
