// Recorded signals compiled to small postfix programs over base linear maps.
//
// A signal (NETLIST.md section 7, `record`) is an arithmetic expression of node voltages,
// part voltages, currents, capacitance voltages and inductance currents. Each of those is
// a linear map of the state (a "base" signal, one row of the output map O, base = O X);
// the expression becomes a postfix program over the bases, run once per sample by the
// engine and on demand by the dense-output trajectory, which also runs it with forward-mode
// derivatives. Internal to solver/ (transient.cpp, dense_output.cpp).
//
// Not here: the output maps themselves (transient.cpp builds O per segment), parsing.
#pragma once

#include <cmath>
#include <map>
#include <string>
#include <vector>

#include "parser/circuit.hpp"

namespace ringdown::solver {

enum class BaseKind { Node, PartVoltage, PartCurrent, CapVoltage, IndCurrent, ElementCurrent };
struct BaseRef {
  BaseKind kind;
  int index;
  bool operator<(const BaseRef& o) const {
    return kind != o.kind ? kind < o.kind : index < o.index;
  }
};

struct Instr {
  enum Kind { Load, Const, Add, Sub, Mul, Div, Neg, Pow } kind = Const;
  int base = -1;
  double value = 0;
};

struct Compiler {
  std::map<BaseRef, int> index;
  std::vector<BaseRef> bases;
  int base_of(BaseRef ref) {
    auto it = index.find(ref);
    if (it != index.end()) return it->second;
    const int i = static_cast<int>(bases.size());
    bases.push_back(ref);
    index[ref] = i;
    return i;
  }
  bool compile(const SignalExpr& e, std::vector<Instr>& out, std::string& error) {
    using Op = SignalExpr::Op;
    auto load = [&](BaseKind k, int i) { out.push_back({Instr::Load, base_of({k, i}), 0}); };
    switch (e.op) {
      case Op::NodeVoltage: load(BaseKind::Node, e.index); return true;
      case Op::ElementCurrent: load(BaseKind::ElementCurrent, e.index); return true;
      case Op::PartQuantity:
        switch (e.quantity) {
          case Quantity::Voltage: load(BaseKind::PartVoltage, e.index); return true;
          case Quantity::Current: load(BaseKind::PartCurrent, e.index); return true;
          case Quantity::Power:
            load(BaseKind::PartVoltage, e.index);
            load(BaseKind::PartCurrent, e.index);
            out.push_back({Instr::Mul, -1, 0});
            return true;
          case Quantity::CapacitanceVoltage: load(BaseKind::CapVoltage, e.index); return true;
          case Quantity::InductanceCurrent: load(BaseKind::IndCurrent, e.index); return true;
        }
        return false;
      case Op::Constant: out.push_back({Instr::Const, -1, e.constant}); return true;
      case Op::Neg:
        if (e.args.size() != 1 || !compile(e.args[0], out, error)) return false;
        out.push_back({Instr::Neg, -1, 0});
        return true;
      case Op::Add: case Op::Sub: case Op::Mul: case Op::Div: case Op::Pow: {
        if (e.args.size() != 2) {
          error = "malformed signal expression";
          return false;
        }
        if (!compile(e.args[0], out, error) || !compile(e.args[1], out, error)) return false;
        const Instr::Kind k = e.op == Op::Add   ? Instr::Add
                              : e.op == Op::Sub ? Instr::Sub
                              : e.op == Op::Mul ? Instr::Mul
                              : e.op == Op::Div ? Instr::Div
                                                : Instr::Pow;
        out.push_back({k, -1, 0});
        return true;
      }
    }
    return false;
  }
};

inline double run_program(const std::vector<Instr>& code, const double* base, double* stack) {
  int top = 0;
  for (const Instr& in : code) {
    switch (in.kind) {
      case Instr::Load: stack[top++] = base[in.base]; break;
      case Instr::Const: stack[top++] = in.value; break;
      case Instr::Neg: stack[top - 1] = -stack[top - 1]; break;
      case Instr::Add: --top; stack[top - 1] += stack[top]; break;
      case Instr::Sub: --top; stack[top - 1] -= stack[top]; break;
      case Instr::Mul: --top; stack[top - 1] *= stack[top]; break;
      case Instr::Div: --top; stack[top - 1] /= stack[top]; break;
      case Instr::Pow: --top; stack[top - 1] = std::pow(stack[top - 1], stack[top]); break;
    }
  }
  return top > 0 ? stack[top - 1] : 0.0;
}

}  // namespace ringdown::solver
