// The elaborated circuit: the parser's public result and the input of mna.
//
// Everything here is flat and in SI: blocks are expanded (hierarchical names
// `SN1.R1`, `SN1.mid`), parameters evaluated, values converted, hidden parts
// (esr, esl, dcr, rpar, srf) made explicit as ordinary elements, and the
// analysis statements (record, report, expect, sweep, trials...) turned into
// structured requests whose names are resolved to indices.
#pragma once

#include <map>
#include <optional>
#include <string>
#include <vector>

#include "parser/diagnostic.hpp"
#include "parser/units.hpp"
#include "parser/waveform.hpp"

namespace ringdown {

// Node 0 is always gnd. Hidden internal nodes are named "<part>#<k>"
// (e.g. "C1#1"): '#' cannot appear in a user's name, so they never clash.
constexpr int kGround = 0;

enum class ElementKind {
  Resistor,
  Capacitor,
  Inductor,
  VoltageSource,  // V(a) - V(b) = waveform
  CurrentSource,  // waveform current from a through the source to b
  Vcvs,           // V(a,b) = gain * V(control_p, control_n)
  Vccs,           // current gain * V(cp,cn) from a through it to b
  Ccvs,           // V(a,b) = gain * i(through)
  Cccs,           // current gain * i(through) from a through it to b
  Switch,         // resistance `closed` while gate > 0.5, else `open`
};

const char* kind_name(ElementKind kind);  // "resistor", "capacitor", ...

// One primitive element of the flat network. Orientation: current is
// measured from `a` through the element to `b` (passive sign convention).
struct Element {
  ElementKind kind = ElementKind::Resistor;
  std::string name;  // "R1", "SN1.R1", hidden: "C1.esr", "C1.esl", "L1.dcr", "L1.rpar", "L1.srf"
  int a = kGround;
  int b = kGround;
  double value = 0;  // Ohm (R), F (C), H (L), gain (controlled sources); unused for sources/switch
  WaveformPtr waveform;              // sources: the value; switch: the gate
  int control_p = kGround;           // vcvs, vccs
  int control_n = kGround;
  int through = -1;                  // ccvs, cccs: element index whose current controls
  double closed = 1e-3;              // switch resistances, Ohm
  double open = 1e9;
  std::optional<double> v0;          // capacitor: initial voltage of the capacitance itself
  std::optional<double> i0;          // inductor: initial current of the inductance, a -> b
  int part = -1;                     // index into Circuit::parts
  bool hidden = false;               // an esr/esl/dcr/rpar/srf part the user did not write
  SourcePosition where;
};

// A part as the user wrote it (one element line), owning one or more
// primitive elements. Terminal quantities X.v, X.i, X.p refer to the part:
//   X.v = V(a) - V(b);  X.i = sum of the currents of `terminal` elements
//   (each of which has its own `a` equal to the part's `a`).
// C.vc is the voltage on `main` (the capacitance); L.il the current of `main`
// (the inductance).
struct Part {
  std::string name;
  ElementKind kind = ElementKind::Resistor;
  int a = kGround;
  int b = kGround;
  int main = -1;                   // element index of the part itself
  std::vector<int> elements;       // all its element indices, main included
  std::vector<int> terminal;       // elements whose currents sum to X.i
  std::optional<double> tol;       // fraction (10% -> 0.1), for trials
  std::optional<double> rated;     // V (capacitor), W (resistor), A (inductor)
  SourcePosition where;
};

// Magnetic coupling between inductances: M = k sqrt(La Lb) for every pair.
struct Coupling {
  std::string name;
  std::vector<int> inductors;  // element indices of the inductances (first node dotted)
  double k = 0;
  SourcePosition where;
};

struct Node {
  std::string name;  // "gnd", "drain", "SN1.mid", "C1#1"
  bool hidden = false;
  SourcePosition where;  // first mention
};

struct Parameter {
  std::string name;   // global or "SN1.R" inside a block instance
  double value = 0;
  Unit unit;
  std::string text;   // the expression as written
  SourcePosition where;
};

// --- Signals ---------------------------------------------------------------

enum class Quantity { Voltage, Current, Power, CapacitanceVoltage, InductanceCurrent };

// An arithmetic expression over node voltages and part quantities.
struct SignalExpr {
  // ElementCurrent: the current of one primitive element (index into Circuit::elements),
  // hidden ones included; not written by users (the energy balance builds it).
  enum class Op { NodeVoltage, PartQuantity, ElementCurrent, Constant, Add, Sub, Mul, Div, Neg, Pow };
  Op op = Op::Constant;
  int index = -1;                 // node (NodeVoltage), part (PartQuantity), element (ElementCurrent)
  Quantity quantity = Quantity::Voltage;
  double constant = 0;            // Constant; exponent for Pow is args[1] (a Constant)
  std::vector<SignalExpr> args;   // operands
};

struct Signal {
  std::string name;  // as written: "drain", "Lc.i", "vds" for `record vds = drain - src`
  SignalExpr expr;
  Unit unit;         // V, A, W, ... when known
  SourcePosition where;
};

// --- Figures (NETLIST.md section 7) -----------------------------------------

struct FigureCall {
  std::string function;            // "max", "energy", "rise", ...
  std::string text;                // the call as written, e.g. "max(drain)"
  std::optional<Signal> signal;    // the signal argument (all figures but energy/power)
  int part = -1;                   // energy(X), power(X): the part
  std::map<std::string, double> args;  // from, to, lo, hi, band, nth, t (at), level (when)
  std::string edge = "any";        // when(): up | down | any
  Unit unit;                       // unit of the figure's value
  SourcePosition where;
};

struct Report {
  std::string name;
  FigureCall figure;
  SourcePosition where;
};

enum class CompareOp { Less, LessEqual, Greater, GreaterEqual, Equal };

struct Expect {
  FigureCall figure;
  CompareOp op = CompareOp::Less;
  double value = 0;
  Unit unit;
  std::optional<double> within;  // Equal only
  bool within_relative = false;  // within given with %: fraction of |value|
  std::string text;              // the whole statement as written after `expect`
  SourcePosition where;
};

// --- Analyses ---------------------------------------------------------------

struct TransientRequest {
  double until = 0;
  double every = 0;        // 0 in the file: defaults to until / 1000 (already applied)
  bool initial_dc = true;  // initial=dc (default) or zero
  SourcePosition where;
};

struct FrequencyRequest {
  double from = 0, to = 0;
  int per_decade = 50;
  std::string input;       // source name as written
  int input_part = -1;     // resolved part index of the source
  SourcePosition where;
};

struct SweepRequest {
  std::string parameter;
  std::vector<double> values;  // in SI, in order
  Unit unit;
  std::string text;            // the LIST as written
  SourcePosition where;
};

enum class Spread { Uniform, Normal, Corners };

struct TrialsRequest {
  long runs = 0;
  unsigned long long seed = 1;
  Spread spread = Spread::Uniform;
  double yield = 1.0;      // fraction
  SourcePosition where;
};

struct Circuit {
  std::string title;                 // "" when the file has none
  std::string file;                  // the top-level file
  std::vector<Node> nodes;           // nodes[0] is gnd
  std::vector<Element> elements;
  std::vector<Part> parts;
  std::vector<Coupling> couplings;
  std::vector<Parameter> parameters;

  std::optional<TransientRequest> transient;
  std::optional<FrequencyRequest> frequency;
  bool modes = false;
  std::vector<Signal> records;
  std::vector<Report> reports;
  std::vector<Expect> expects;
  std::vector<SweepRequest> sweeps;
  std::optional<TrialsRequest> trials;

  Diagnostics warnings;              // load-time warnings (no errors here)

  int find_node(const std::string& name) const;     // -1 if none
  int find_part(const std::string& name) const;     // -1 if none
  int find_element(const std::string& name) const;  // -1 if none
};

}  // namespace ringdown
