// Reports, expects, ratings and the safety screen on the exact trajectory (see evaluation.hpp).
#include "cli/evaluation.hpp"

#include <algorithm>
#include <cmath>
#include <limits>
#include <memory>

#include "parser/units.hpp"
#include "solver/modes.hpp"
#include "solver/transient.hpp"

namespace ringdown::cli {

namespace {

// The safety screen looks at samples first and computes the exact peak (between samples) of
// the voltages whose sampled peak comes within this fraction of a limit: a voltage whose
// samples stay below half the band cannot reach the band between samples unless the output
// step misses the ringing, which the engine warns about (common practice, no source).
constexpr double kScreenMargin = 0.5;
// More screened voltages than this: the screen keeps the sources, the recorded signals and the
// capacitor voltages, and says so (each voltage costs a pass over the samples).
constexpr std::size_t kScreenLimit = 2000;
// Bleed-down: horizons tried in turn after the supply is removed, s, and samples per run.
constexpr double kBleedHorizons[] = {1.0, 100.0, 3600.0};
constexpr double kBleedSamples = 2000;
// An open source in the bleed-down network: the same resistance as an open switch's default
// (NETLIST.md, switch open=1G).
constexpr double kOpenOhms = 1e9;

Signal part_quantity_signal(const Circuit& c, int part, Quantity q) {
  const Part& p = c.parts[static_cast<std::size_t>(part)];
  Signal s;
  s.expr.op = SignalExpr::Op::PartQuantity;
  s.expr.index = part;
  s.expr.quantity = q;
  switch (q) {
    case Quantity::Voltage: s.name = p.name + ".v"; s.unit = Dimension::volt(); break;
    case Quantity::Current: s.name = p.name + ".i"; s.unit = Dimension::ampere(); break;
    case Quantity::Power: s.name = p.name + ".p"; s.unit = Dimension::watt(); break;
    case Quantity::CapacitanceVoltage: s.name = p.name + ".vc"; s.unit = Dimension::volt(); break;
    case Quantity::InductanceCurrent: s.name = p.name + ".il"; s.unit = Dimension::ampere(); break;
  }
  s.where = p.where;
  return s;
}

Signal node_signal(const Circuit& c, int node) {
  Signal s;
  s.expr.op = SignalExpr::Op::NodeVoltage;
  s.expr.index = node;
  s.name = c.nodes[static_cast<std::size_t>(node)].name;
  s.unit = Dimension::volt();
  s.where = c.nodes[static_cast<std::size_t>(node)].where;
  return s;
}

FigureCall internal_call(const std::string& function, const Signal& signal, const Unit& unit) {
  FigureCall call;
  call.function = function;
  call.signal = signal;
  call.text = function + "(" + signal.name + ")";
  call.unit = unit;
  call.where = signal.where;
  return call;
}

// The largest |S| and its instant, from tmax and tmin (two scans; peak would be a third).
struct Magnitude {
  solver::FigureValue figure;  // ok/error of the scans
  double value = 0;
  double instant = 0;
};
Magnitude largest_magnitude(const solver::Trajectory& tr, std::size_t signal, const Signal& s,
                            solver::ScanMemo& memo) {
  Magnitude m;
  const solver::FigureValue a = solver::evaluate_figure(internal_call("tmax", s, Dimension::second()), tr, signal, std::nullopt, &memo);
  const solver::FigureValue b = solver::evaluate_figure(internal_call("tmin", s, Dimension::second()), tr, signal, std::nullopt, &memo);
  m.figure = a.ok ? b : a;
  if (a.ok && b.ok) {
    const double va = std::abs(tr.value(signal, a.value)), vb = std::abs(tr.value(signal, b.value));
    m.value = std::max(va, vb);
    m.instant = va >= vb ? a.value : b.value;
  }
  return m;
}

bool is_independent_source(ElementKind k) {
  return k == ElementKind::VoltageSource || k == ElementKind::CurrentSource;
}

// Expression builders for the energy balance.
SignalExpr constant(double v) {
  SignalExpr e;
  e.op = SignalExpr::Op::Constant;
  e.constant = v;
  return e;
}
SignalExpr binary(SignalExpr::Op op, SignalExpr a, SignalExpr b) {
  SignalExpr e;
  e.op = op;
  e.args.push_back(std::move(a));
  e.args.push_back(std::move(b));
  return e;
}
SignalExpr element_voltage(const Element& el) {
  auto node = [](int n) {
    SignalExpr e;
    e.op = SignalExpr::Op::NodeVoltage;
    e.index = n;
    return e;
  };
  if (el.b == kGround) return node(el.a);
  if (el.a == kGround) return binary(SignalExpr::Op::Sub, constant(0), node(el.b));
  return binary(SignalExpr::Op::Sub, node(el.a), node(el.b));
}
SignalExpr element_current(int e) {
  SignalExpr x;
  x.op = SignalExpr::Op::ElementCurrent;
  x.index = e;
  return x;
}
// The sum of `terms` as a balanced tree (the signal compiler recurses: a chain of 1e5 terms
// would be 1e5 frames deep, a balanced tree 17). Empty when there are none.
std::optional<SignalExpr> balanced_sum(std::vector<SignalExpr>& terms, std::size_t lo, std::size_t hi) {
  if (lo >= hi) return std::nullopt;
  if (hi - lo == 1) return std::move(terms[lo]);
  const std::size_t mid = lo + (hi - lo) / 2;
  return binary(SignalExpr::Op::Add, std::move(*balanced_sum(terms, lo, mid)),
                std::move(*balanced_sum(terms, mid, hi)));
}
void accumulate(std::vector<SignalExpr>& acc, SignalExpr term) { acc.push_back(std::move(term)); }
Signal internal_signal(const std::string& name, std::optional<SignalExpr> expr, Dimension unit) {
  Signal s;
  s.name = name;
  s.expr = expr ? std::move(*expr) : constant(0);
  s.unit = unit;
  return s;
}

// The energy balance's quadrature visits about 24 instants per output interval (Gauss-Legendre
// 8 and 16), each a propagation costing about states^2: skip it above this many
// samples x states^2 (a few seconds of work; common practice, no source).
constexpr double kEnergyBudget = 2e8;
// Relative residual above which the balance is reported as a warning: the engine holds about
// 1e-12 and the quadrature 1e-12 (issue 3 measurements), so 1e-6 means something is wrong.
constexpr double kEnergyWarn = 1e-6;
constexpr std::size_t kEnergyElementLimit = 5000;
// ringfreq/damping against the natural modes: a mode "matches" when its damped frequency is
// within this fraction of the measured ring frequency (the log decrement of a single mode is
// exact; a 2 % mismatch means another mode or the source shapes the ringing; common practice,
// no source).
constexpr double kModeMatch = 0.02;

// The cross-check of NETLIST.md's ringfreq and damping against the dominant natural mode: the
// oscillating mode (over every switch configuration) nearest in damped frequency. Adds a note
// to the figure: which mode it is, or that none is near.
void cross_check_ringing(const FigureCall& call, solver::FigureValue& v,
                         const std::optional<solver::ModesResult>& modes) {
  if (!v.ok || !modes || !modes->ok || !v.note.empty()) return;
  if (call.function != "ringfreq" && call.function != "damping") return;
  const solver::Mode* best = nullptr;
  double best_gap = std::numeric_limits<double>::infinity();
  for (const auto& cfg : modes->configurations)
    for (const auto& m : cfg.modes) {
      if (m.kind != solver::ModeKind::Oscillating) continue;
      // ringfreq compares frequencies; damping compares damping ratios of the modes that
      // ring at all, and names the one nearest.
      const double gap = call.function == "ringfreq" ? std::abs(m.damped_hz - v.value) / std::max(v.value, 1e-300)
                                                     : std::abs(m.damping_ratio - v.value);
      if (gap < best_gap) {
        best_gap = gap;
        best = &m;
      }
    }
  if (!best) {
    v.note = "no oscillating natural mode to compare with";
    return;
  }
  const std::string mode = format_si(best->damped_hz, "Hz") + ", zeta " + format_si(best->damping_ratio, "", 3);
  if (call.function == "ringfreq")
    v.note = best_gap <= kModeMatch ? "natural mode at " + mode
                                    : "nearest natural mode " + mode + ": the ringing mixes modes or follows a source";
  else
    v.note = best_gap <= kModeMatch * std::max(best->damping_ratio, 0.05)
                 ? "natural mode at " + mode
                 : "nearest natural mode " + mode;
}

}  // namespace

int Evaluation::failed_expects() const {
  int n = 0;
  for (const ExpectOutcome& e : expects) n += e.pass ? 0 : 1;
  return n;
}

EvaluationPlan::EvaluationPlan(const Circuit& circuit, const std::vector<Signal>& streamed,
                               const SafetyOptions& safety, const EvaluationScope& scope)
    : circuit_(circuit), safety_(safety), streamed_count_(streamed.size()),
      streamed_names_(streamed) {
  for (const Report& r : circuit.reports) report_plan_.push_back(plan_figure(r.figure));
  for (const Expect& e : circuit.expects) expect_plan_.push_back(plan_figure(e.figure));

  // rated=: capacitors by C.vc, inductors by L.il (the winding's current), resistors by mean power.
  for (std::size_t p = 0; p < circuit.parts.size(); ++p) {
    const Part& part = circuit.parts[p];
    if (!part.rated) continue;
    PlannedRating pr;
    pr.part = static_cast<int>(p);
    if (part.kind == ElementKind::Capacitor || part.kind == ElementKind::Inductor) {
      const bool cap = part.kind == ElementKind::Capacitor;
      const Signal s = part_quantity_signal(
          circuit, pr.part, cap ? Quantity::CapacitanceVoltage : Quantity::InductanceCurrent);
      pr.call = internal_call("peak", s, s.unit);
      pr.figure.signal = index_of(s);
    } else if (part.kind == ElementKind::Resistor) {
      pr.call.function = "power";
      pr.call.text = "power(" + part.name + ")";
      pr.call.part = pr.part;
      pr.call.unit = Dimension::watt();
      pr.call.where = part.where;
      pr.figure.power = std::make_pair(part_signal(pr.part, Quantity::Voltage),
                                       part_signal(pr.part, Quantity::Current));
    } else {
      continue;  // the parser accepts rated= only on these three kinds
    }
    rating_plan_.push_back(std::move(pr));
  }

  // Safety screen: every named node, every independent source's voltage; every capacitor's
  // own voltage for the stored charge (and the inductor currents for the bleed-down run).
  std::vector<ScreenedVoltage> screen;
  for (std::size_t n = 1; n < circuit.nodes.size(); ++n) {
    if (circuit.nodes[n].hidden) continue;
    screen.push_back({circuit.nodes[n].name, static_cast<std::size_t>(-1)});
  }
  const bool too_many = screen.size() > kScreenLimit;
  if (too_many) {
    screen.clear();
    screen_limitation_ = "the circuit has more than " + std::to_string(kScreenLimit) +
                         " nodes: the screen checked the sources, the recorded signals and the "
                         "capacitor voltages only";
  } else {
    std::size_t k = 0;
    for (std::size_t n = 1; n < circuit.nodes.size(); ++n) {
      if (circuit.nodes[n].hidden) continue;
      screen[k++].signal = index_of(node_signal(circuit, static_cast<int>(n)));
    }
  }
  for (std::size_t p = 0; p < circuit.parts.size(); ++p) {
    const Part& part = circuit.parts[p];
    if (is_independent_source(part.kind))
      screen.push_back({part.name + " (source)", part_signal(static_cast<int>(p), Quantity::Voltage)});
    if (part.kind == ElementKind::Capacitor) {
      const std::size_t vc = part_signal(static_cast<int>(p), Quantity::CapacitanceVoltage);
      capacitors_.push_back({static_cast<int>(p), vc});
      if (too_many) screen.push_back({part.name + ".vc", vc});
    }
    if (part.kind == ElementKind::Inductor) inductors_.push_back({static_cast<int>(p), part_signal(static_cast<int>(p), Quantity::InductanceCurrent)});
  }
  if (too_many)
    for (std::size_t i = 0; i < streamed.size(); ++i)
      if (streamed[i].unit && *streamed[i].unit == Dimension::volt()) screen.push_back({streamed[i].name, i});
  screen_ = std::move(screen);

  // Energy balance over every primitive element (hidden esr/esl/dcr/rpar/srf included).
  // Each element adds a row to the engine's output map: beyond a few thousand elements
  // that map would cost more memory than the run itself.
  if (!scope.energy_balance || circuit.elements.size() > kEnergyElementLimit) return;
  energy_planned_ = true;
  std::vector<SignalExpr> delivered, dissipated, stored;
  for (std::size_t e = 0; e < circuit.elements.size(); ++e) {
    const Element& el = circuit.elements[e];
    const int ei = static_cast<int>(e);
    switch (el.kind) {
      case ElementKind::Resistor:
      case ElementKind::Switch:
        accumulate(dissipated, binary(SignalExpr::Op::Mul, element_voltage(el), element_current(ei)));
        break;
      case ElementKind::VoltageSource:
      case ElementKind::CurrentSource:
      case ElementKind::Vcvs:
      case ElementKind::Vccs:
      case ElementKind::Ccvs:
      case ElementKind::Cccs:
        // Delivered = -(absorbed) under the passive sign convention.
        accumulate(delivered, binary(SignalExpr::Op::Mul, binary(SignalExpr::Op::Sub, constant(0), element_voltage(el)),
                                     element_current(ei)));
        break;
      case ElementKind::Capacitor: {
        SignalExpr v = element_voltage(el);
        accumulate(stored, binary(SignalExpr::Op::Mul, constant(0.5 * el.value), binary(SignalExpr::Op::Mul, v, v)));
        break;
      }
      case ElementKind::Inductor:
        accumulate(stored, binary(SignalExpr::Op::Mul, constant(0.5 * el.value),
                                  binary(SignalExpr::Op::Mul, element_current(ei), element_current(ei))));
        break;
    }
  }
  for (const Coupling& k : circuit.couplings) {
    for (std::size_t a = 0; a < k.inductors.size(); ++a)
      for (std::size_t b = a + 1; b < k.inductors.size(); ++b) {
        const int ia = k.inductors[a], ib = k.inductors[b];
        const double m = k.k * std::sqrt(circuit.elements[static_cast<std::size_t>(ia)].value *
                                         circuit.elements[static_cast<std::size_t>(ib)].value);
        accumulate(stored, binary(SignalExpr::Op::Mul, constant(m),
                                  binary(SignalExpr::Op::Mul, element_current(ia), element_current(ib))));
      }
  }
  delivered_ = index_of(internal_signal("#delivered", balanced_sum(delivered, 0, delivered.size()), Dimension::watt()));
  dissipated_ = index_of(internal_signal("#dissipated", balanced_sum(dissipated, 0, dissipated.size()), Dimension::watt()));
  stored_ = index_of(internal_signal("#stored", balanced_sum(stored, 0, stored.size()), Dimension::joule()));
}

std::size_t EvaluationPlan::index_of(const Signal& signal) {
  for (std::size_t i = 0; i < streamed_names_.size(); ++i)
    if (streamed_names_[i].name == signal.name) return i;
  for (std::size_t i = 0; i < extra_.size(); ++i)
    if (extra_[i].name == signal.name) return streamed_count_ + i;
  extra_.push_back(signal);
  return streamed_count_ + extra_.size() - 1;
}

std::size_t EvaluationPlan::part_signal(int part, Quantity quantity) {
  return index_of(part_quantity_signal(circuit_, part, quantity));
}

EvaluationPlan::PlannedFigure EvaluationPlan::plan_figure(const FigureCall& call) {
  PlannedFigure f;
  if (call.function == "energy" || call.function == "power") {
    if (call.part >= 0)
      f.power = std::make_pair(part_signal(call.part, Quantity::Voltage),
                               part_signal(call.part, Quantity::Current));
    return f;
  }
  if (call.signal) f.signal = index_of(*call.signal);
  return f;
}

Evaluation EvaluationPlan::evaluate(const solver::Trajectory& tr, std::size_t states,
                                    const EvaluationScope& scope) const {
  Evaluation out;
  // One scan per signal and window for every figure below (reports and expects on the same
  // signal, tmax and tmin of a rating).
  solver::ScanMemo memo;
  // Natural modes, for the ringfreq/damping cross-check, when a figure asks for them.
  std::optional<solver::ModesResult> modes;
  {
    bool ringing = false;
    for (const Report& r : circuit_.reports)
      ringing = ringing || r.figure.function == "ringfreq" || r.figure.function == "damping";
    for (const Expect& e : circuit_.expects)
      ringing = ringing || e.figure.function == "ringfreq" || e.figure.function == "damping";
    if (ringing) {
      Diagnostics ignored;  // the run itself already reported the circuit's problems
      modes = solver::compute_modes(circuit_, solver::ModesOptions{}, ignored);
    }
  }
  for (std::size_t i = 0; i < circuit_.reports.size(); ++i) {
    const Report& r = circuit_.reports[i];
    FigureOutcome o;
    o.name = r.name;
    o.call = &r.figure;
    o.where = r.where;
    o.value = solver::evaluate_figure(r.figure, tr, report_plan_[i].signal, report_plan_[i].power, &memo);
    cross_check_ringing(r.figure, o.value, modes);
    if (!o.value.ok)
      out.diagnostics.push_back(make_diagnostic(Severity::Error, r.where,
                                                "report " + r.name + ": " + o.value.error));
    out.reports.push_back(std::move(o));
  }
  for (std::size_t i = 0; i < circuit_.expects.size(); ++i) {
    const Expect& e = circuit_.expects[i];
    ExpectOutcome o;
    o.expect = &e;
    o.value = solver::evaluate_figure(e.figure, tr, expect_plan_[i].signal, expect_plan_[i].power, &memo);
    cross_check_ringing(e.figure, o.value, modes);
    o.pass = o.value.ok && solver::expect_holds(e, o.value.value);
    if (!o.value.ok)
      out.diagnostics.push_back(make_diagnostic(Severity::Error, e.where,
                                                "expect " + e.text + ": " + o.value.error));
    out.expects.push_back(std::move(o));
  }

  // --- rated= -----------------------------------------------------------------------------
  for (const PlannedRating& pr : rating_plan_) {
    const Part& part = circuit_.parts[static_cast<std::size_t>(pr.part)];
    RatingOutcome o;
    o.part = part.name;
    o.figure = pr.call.text;
    o.rating = *part.rated;
    o.unit = pr.call.unit;
    o.where = part.where;
    solver::FigureValue v;
    if (pr.call.function == "peak") {
      const Magnitude m = largest_magnitude(tr, pr.figure.signal, *pr.call.signal, memo);
      v = m.figure;
      if (v.ok) {
        v.value = m.value;
        v.unit = pr.call.unit;
        o.instant = m.instant;
      }
    } else {
      v = solver::evaluate_figure(pr.call, tr, pr.figure.signal, pr.figure.power, &memo);
    }
    o.ok = v.ok;
    o.error = v.error;
    o.value = v.value;
    o.exceeded = v.ok && std::abs(o.value) > o.rating;
    const std::string unit = o.unit ? unit_symbol(*o.unit) : std::string();
    if (!v.ok) {
      out.diagnostics.push_back(make_diagnostic(Severity::Warning, part.where,
                                                part.name + ": its rating could not be checked: " + v.error));
    } else if (o.exceeded) {
      std::string msg = part.name + " exceeds its rating: " + o.figure + " = " +
                        format_si(o.value, unit) + " against rated=" + format_si(o.rating, unit);
      msg += o.instant ? " at t = " + format_si(*o.instant, "s") : std::string(" (mean over the run)");
      out.diagnostics.push_back(make_diagnostic(
          Severity::Warning, part.where, msg,
          part.kind == ElementKind::Resistor ? "a part with a higher power rating, or less loss"
                                             : "a part with a higher rating, or more damping"));
    }
    out.ratings.push_back(std::move(o));
  }

  // --- Energy balance ------------------------------------------------------------------
  {
    const double samples = static_cast<double>(tr.sample_times().size());
    const double n = static_cast<double>(std::max<std::size_t>(states, 1));
    EnergyBalance& e = out.energy;
    if (!scope.energy_balance) {
      e.skipped = "not computed for sweep points and trials";
    } else if (!energy_planned_) {
      e.skipped = "the circuit has more than " + std::to_string(kEnergyElementLimit) + " elements";
    } else if (samples * n * n > kEnergyBudget) {
      e.skipped = std::to_string(states) + " states over " + std::to_string(tr.sample_times().size()) +
                  " samples is beyond the quadrature's budget";
    } else {
      Signal sig;
      sig.unit = Dimension::watt();
      sig.name = "#delivered";
      const FigureCall integral = internal_call("integral", sig, Dimension::joule());
      const solver::FigureValue d = solver::evaluate_figure(integral, tr, delivered_, std::nullopt);
      const solver::FigureValue r = solver::evaluate_figure(integral, tr, dissipated_, std::nullopt);
      if (d.ok && r.ok) {
        e.computed = true;
        e.delivered = d.value;
        e.dissipated = r.value;
        e.stored_change = tr.value(stored_, tr.end()) - tr.value(stored_, tr.start());
        const double scale = std::max({std::abs(e.delivered), std::abs(e.dissipated),
                                       std::abs(e.stored_change), std::numeric_limits<double>::min()});
        e.residual = std::abs(e.delivered - e.dissipated - e.stored_change) / scale;
        if (scale == std::numeric_limits<double>::min()) e.residual = 0;
        if (e.residual > kEnergyWarn)
          out.diagnostics.push_back(make_diagnostic(
              Severity::Warning, circuit_.transient ? circuit_.transient->where : SourcePosition{},
              "the energy balance of the run is off by " + format_si(e.residual, "") +
                  " (relative): the solution may not be accurate",
              "check for extreme element values; `ringdown inspect` shows the state variables"));
      } else {
        e.skipped = d.ok ? r.error : d.error;
      }
    }
  }

  // --- Safety screen -------------------------------------------------------------------
  SafetyReport& s = out.safety;
  s.band = safety_;
  s.limitation = screen_limitation_;
  const std::vector<double> times = tr.sample_times();
  // The sampled statistics of every screened voltage: all of them at every sample in one
  // pass of the trajectory (Trajectory::at_samples), then each voltage's sums over its
  // samples in time order.
  struct Sampled {
    double peak = 0, at = 0, sum = 0, sum2 = 0;
  };
  std::vector<Sampled> sampled(screen_.size());
  std::vector<std::size_t> screened(screen_.size());
  for (std::size_t i = 0; i < screen_.size(); ++i) screened[i] = screen_[i].signal;
  const std::size_t sample_count = times.size();
  std::vector<double> at_samples(screen_.size() * sample_count);
  if (!at_samples.empty()) tr.at_samples(screened.data(), screened.size(), at_samples.data(), nullptr);
  for (std::size_t i = 0; i < screen_.size(); ++i) {
    Sampled& q = sampled[i];
    const double* v = at_samples.data() + i * sample_count;
    for (std::size_t k = 0; k < sample_count; ++k) {
      const double x = v[k];
      if (std::abs(x) > q.peak) q.at = times[k];
      q.peak = std::max(q.peak, std::abs(x));
      q.sum += x;
      q.sum2 += x * x;
    }
  }
  for (std::size_t i = 0; i < screen_.size(); ++i) {
    const ScreenedVoltage& v = screen_[i];
    const double sampled_peak = sampled[i].peak, sampled_at = sampled[i].at;
    const double sum = sampled[i].sum, sum2 = sampled[i].sum2;
    const double n = static_cast<double>(std::max<std::size_t>(times.size(), 1));
    const double sampled_ac = std::sqrt(std::max(0.0, sum2 / n - (sum / n) * (sum / n)));
    if (sampled_peak < kScreenMargin * safety_.dc && sampled_ac < kScreenMargin * safety_.ac_rms)
      continue;
    HazardPoint h;
    h.name = v.name;
    if (!scope.exact_safety) {
      h.peak = sampled_peak;
      h.instant = sampled_at;
      h.ac_rms = sampled_ac;
      h.over_dc = h.peak > safety_.dc;
      h.over_ac = h.ac_rms > safety_.ac_rms;
      if (h.over_dc || h.over_ac) s.points.push_back(h);
      continue;
    }
    Signal sig;
    sig.name = v.name;
    sig.unit = Dimension::volt();
    const Magnitude m = largest_magnitude(tr, v.signal, sig, memo);
    h.peak = m.figure.ok ? m.value : sampled_peak;
    if (m.figure.ok) h.instant = m.instant;
    h.over_dc = h.peak > safety_.dc;
    h.ac_rms = sampled_ac;
    // The AC rms decides only when the peak does not: then compute it exactly.
    if (!h.over_dc && sampled_ac >= kScreenMargin * safety_.ac_rms) {
      const solver::FigureValue r = solver::evaluate_figure(internal_call("rms", sig, Dimension::volt()), tr, v.signal, std::nullopt);
      const solver::FigureValue m = solver::evaluate_figure(internal_call("mean", sig, Dimension::volt()), tr, v.signal, std::nullopt);
      if (r.ok && m.ok) h.ac_rms = std::sqrt(std::max(0.0, r.value * r.value - m.value * m.value));
      h.over_ac = h.ac_rms > safety_.ac_rms;
    }
    if (h.over_dc || h.over_ac) s.points.push_back(h);
  }
  std::sort(s.points.begin(), s.points.end(),
            [](const HazardPoint& x, const HazardPoint& y) { return x.peak > y.peak; });
  s.hazardous = !s.points.empty();
  if (s.hazardous && scope.exact_safety) {
    const double end = tr.end();
    std::vector<std::pair<int, double>> vc, il;
    for (const CapacitorSignal& c : capacitors_) {
      const double v = tr.value(c.signal, end);
      vc.emplace_back(c.part, v);
      if (std::abs(v) > safety_.dc) {
        StoredCharge q;
        q.capacitor = circuit_.parts[static_cast<std::size_t>(c.part)].name;
        q.voltage = std::abs(v);
        const Element& main = circuit_.elements[static_cast<std::size_t>(
            circuit_.parts[static_cast<std::size_t>(c.part)].main)];
        q.energy = 0.5 * main.value * v * v;
        s.stored.push_back(q);
      }
    }
    for (const CapacitorSignal& l : inductors_) il.emplace_back(l.part, tr.value(l.signal, end));
    if (!s.stored.empty()) bleed_down(circuit_, s.stored, vc, il, end, safety_);
  }
  return out;
}

void bleed_down(const Circuit& circuit, std::vector<StoredCharge>& stored,
                const std::vector<std::pair<int, double>>& final_vc,
                const std::vector<std::pair<int, double>>& final_il, double end,
                const SafetyOptions& band) {
  // The disconnected network: every independent source opened (a large resistance keeps the
  // topology valid: an open voltage source in series with an inductor would leave the
  // inductor's current nowhere to go), switches held as they end, every capacitance and
  // inductance holding its state at the end of the run.
  Circuit c = circuit;
  for (Element& e : c.elements) {
    if (e.kind == ElementKind::Ccvs || e.kind == ElementKind::Cccs) {
      const Element& through = circuit.elements[static_cast<std::size_t>(e.through)];
      if (is_independent_source(through.kind)) {
        for (StoredCharge& q : stored)
          q.note = "not computed: " + e.name + " is controlled by a source's current";
        return;
      }
    }
  }
  for (Element& e : c.elements) {
    if (is_independent_source(e.kind)) {
      e.kind = ElementKind::Resistor;
      e.value = kOpenOhms;
      e.waveform.reset();
    } else if (e.kind == ElementKind::Switch && e.waveform) {
      e.waveform = make_constant(e.waveform->value(end) > 0.5 ? 1.0 : 0.0);
    }
  }
  for (const auto& [part, v] : final_vc)
    c.elements[static_cast<std::size_t>(c.parts[static_cast<std::size_t>(part)].main)].v0 = v;
  for (const auto& [part, i] : final_il)
    c.elements[static_cast<std::size_t>(c.parts[static_cast<std::size_t>(part)].main)].i0 = i;
  c.warnings.clear();

  std::vector<Signal> signals;
  std::vector<std::size_t> which;
  for (std::size_t k = 0; k < stored.size(); ++k) {
    const int part = c.find_part(stored[k].capacitor);
    if (part < 0) continue;
    signals.push_back(part_quantity_signal(c, part, Quantity::CapacitanceVoltage));
    which.push_back(k);
  }
  std::vector<bool> done(stored.size(), false);
  for (double horizon : kBleedHorizons) {
    solver::TransientOptions o;
    o.until = horizon;
    o.every = horizon / kBleedSamples;
    o.initial_dc = true;  // with every state held by v0/i0: the end state itself
    std::vector<double> first_below(signals.size(), -1.0);
    std::vector<bool> above(signals.size(), true);
    const solver::SampleSink sink = [&](double t, const double* v, std::size_t n) {
      for (std::size_t i = 0; i < n; ++i) {
        const bool is_above = std::abs(v[i]) > band.bleed_level;
        if (!is_above && above[i] && first_below[i] < 0) first_below[i] = t;
        if (is_above) first_below[i] = -1.0;  // charged again (ringing): not yet bled
        above[i] = is_above;
      }
    };
    Diagnostics d;
    o.dense_output = true;
    const solver::TransientSummary sum = solver::run_transient(c, signals, o, sink, d);
    if (sum.status != solver::Status::Ok) {
      for (std::size_t i = 0; i < which.size(); ++i)
        if (!done[which[i]]) stored[which[i]].note = "not computed: the disconnected network could not be solved";
      return;
    }
    bool all = true;
    for (std::size_t i = 0; i < which.size(); ++i) {
      StoredCharge& q = stored[which[i]];
      if (done[which[i]]) continue;
      if (first_below[i] >= 0) {
        // Refine between the samples on the exact solution: the last crossing of the level.
        double t = first_below[i];
        if (sum.trajectory) {
          const double lo = std::max(0.0, t - o.every);
          double a = lo, b = t;
          for (int it = 0; it < 60; ++it) {
            const double m = 0.5 * (a + b);
            if (std::abs(sum.trajectory->value(i, m)) > band.bleed_level) a = m; else b = m;
          }
          t = b;
        }
        q.bleed_time = t;
        done[which[i]] = true;
      } else {
        all = false;
      }
    }
    if (all) return;
  }
  for (std::size_t i = 0; i < which.size(); ++i)
    if (!done[which[i]])
      stored[which[i]].note = "stays above " + format_si(band.bleed_level, "V") + " for more than " +
                              format_si(kBleedHorizons[std::size(kBleedHorizons) - 1], "s") +
                              " once the supply is removed (no bleed path)";
}

}  // namespace ringdown::cli
