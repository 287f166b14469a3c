// Fixed-step trapezoidal rule and BDF2 on C x' + G x = B u: see
// reference_integrator.hpp.
//
// Methods (standard numerical analysis, e.g. Hairer & Wanner, Solving
// Ordinary Differential Equations II, 1996, chapters on BDF and on
// differential-algebraic problems; from memory):
//   trapezoidal  C (x1 - x0)/h = (z0 + z1)/2,  z = B u - G x = C x'
//                i.e. (2C/h + G) x1 = (2C/h - G) x0 + B (u0 + u1);
//   BDF2         C (3 x2 - 4 x1 + x0)/(2h) + G x2 = B u2.
// Both are second order on index-1 problems. The trapezoidal form needs z0 to
// be C x'(t0), which holds only when x0 satisfies the algebraic equations for
// u0; otherwise the algebraic residual flips sign every step forever. Hence
// the consistent restart at t = 0 and at every corner and switching instant:
// keep C x (the charges and fluxes, continuous because index-2 topologies are
// rejected by mna) and solve the algebraic rows N^T (G x - B u) = 0 for a
// correction in ker C = span N:  (N^T G N) y = N^T (B u - G x),  x += N y.
// When N^T G N is singular (a cut of inductors alone: formally index 2,
// mna::Network::inductor_cuts) the least-squares correction is followed by a
// very short backward-Euler step whose ker C part settles the unknowns fixed
// by the hidden constraint.
// Inputs at a step's end are taken as the left limit (the value just before a
// corner), at its start as the right limit, so a jump sits exactly at the
// restart between two steps.
#include "solver/reference_integrator.hpp"

#include <Eigen/LU>
#include <Eigen/QR>
#include <algorithm>
#include <cmath>
#include <limits>
#include <map>
#include <string>
#include <utility>

#include "parser/units.hpp"

namespace ringdown::solver {
namespace {

// Closed while gate(t) > 0.5 (NETLIST.md section 4).
constexpr double kGateLevel = 0.5;
// Instants closer than this fraction of the step are one instant (k*h and a
// corner written in the file can differ in the last bits).
constexpr double kSameInstantFraction = 1e-9;
// NETLIST.md section 7: N = round(T/H) when T/H is within 1e-9 (relative) of
// a whole number, else floor(T/H).
constexpr double kWholeStepsTolerance = 1e-9;
// Length of the backward-Euler step, as a fraction of h, that settles the
// unknowns fixed only by a hidden constraint at a restart (error O(fraction)
// in those unknowns; small enough to be below the method's own O(h^2)).
constexpr double kHiddenConstraintStep = 1e-7;

enum class StepKind { Trapezoidal, Bdf2 };

struct Event {
  double time = 0;
  int switch_index = -1;  // -1: a source corner (inputs change formula)
  int direction = 0;      // switch: +1 gate rises through 0.5 (closes), -1 opens
};

struct Configuration {
  mna::Descriptor d;
  Eigen::MatrixXd projected_G;  // N^T G N
  Eigen::FullPivLU<Eigen::MatrixXd> projection;
  bool projection_regular = true;
  std::map<std::pair<int, double>, Eigen::PartialPivLU<Eigen::MatrixXd>> steps;
};

class Integrator {
 public:
  Integrator(const Circuit& circuit, const mna::Network& network, ReferenceSolution& out, double h)
      : circuit_(circuit), network_(network), out_(out), N_(network.null_space_of_C()), h_(h) {}

  Eigen::VectorXd inputs(double t) const {
    Eigen::VectorXd u(network_.inputs());
    for (int j = 0; j < network_.inputs(); ++j) {
      const Element& e = circuit_.elements[static_cast<std::size_t>(
          network_.input_elements()[static_cast<std::size_t>(j)])];
      u(j) = e.waveform->value(t);
    }
    return u;
  }
  // Left limit at t: the value an instant before (right-continuous waveforms).
  Eigen::VectorXd inputs_before(double t) const {
    return inputs(std::nextafter(t, -std::numeric_limits<double>::infinity()));
  }

  Configuration& configuration(const mna::SwitchState& closed) {
    auto it = configurations_.find(closed);
    if (it != configurations_.end()) return it->second;
    Configuration c;
    c.d = network_.stamp(circuit_, closed);
    if (N_.cols() > 0) {
      c.projected_G = N_.transpose() * c.d.G * N_;
      c.projection.compute(c.projected_G);
      c.projection_regular = c.projection.isInvertible();
    }
    return configurations_.emplace(closed, std::move(c)).first->second;
  }

  // (a C + G) factored, a = 2/s (trapezoidal) or 3/(2s) (BDF2).
  const Eigen::PartialPivLU<Eigen::MatrixXd>* step_matrix(Configuration& c, StepKind kind, double s,
                                                         double t) {
    const auto key = std::make_pair(static_cast<int>(kind), s);
    auto it = c.steps.find(key);
    if (it != c.steps.end()) return &it->second;
    const double a = kind == StepKind::Trapezoidal ? 2.0 / s : 1.5 / s;
    Eigen::PartialPivLU<Eigen::MatrixXd> lu(a * c.d.C + c.d.G);
    const double rcond = lu.rcond();
    if (!(rcond > 0) || !std::isfinite(rcond)) {
      fail(t, "the step matrix (a C + G) is singular for a step of " + format_si(s, "s"));
      return nullptr;
    }
    return &c.steps.emplace(key, std::move(lu)).first->second;
  }

  // Consistent state for inputs u: keep C x, satisfy the algebraic rows.
  Eigen::VectorXd project(Configuration& c, const Eigen::VectorXd& x, const Eigen::VectorXd& u) const {
    if (N_.cols() == 0) return x;
    const Eigen::VectorXd residual = N_.transpose() * (c.d.B * u - c.d.G * x);
    if (c.projection_regular) return x + N_ * c.projection.solve(residual);
    // Singular N^T G N (a cut of inductors alone): some algebraic unknowns are
    // fixed only by the derivative of a constraint (v(m) between two series
    // inductors). A backward-Euler step of length delta -> 0 satisfies that
    // hidden constraint to O(delta); take only its ker C components, so C x
    // (charges, fluxes) stays exactly as it was.
    const Eigen::VectorXd x_ls = x + N_ * c.projected_G.completeOrthogonalDecomposition().solve(residual);
    const double delta = kHiddenConstraintStep * h_;
    const Eigen::VectorXd x_be =
        (c.d.C / delta + c.d.G).partialPivLu().solve(c.d.C * x_ls / delta + c.d.B * u);
    if (!x_be.allFinite()) return x_ls;
    return x_ls + N_ * (N_.transpose() * (x_be - x_ls));
  }

  void fail(double t, const std::string& what) {
    Diagnostic d;
    d.severity = Severity::Error;
    d.message = "reference integrator stopped at t = " + format_si(t, "s") + ": " + what;
    d.hint = "check the circuit for a singular or unstable network (mna topology messages name "
             "the elements), or use a smaller step";
    out_.diagnostics.push_back(std::move(d));
  }

  const Circuit& circuit_;
  const mna::Network& network_;
  ReferenceSolution& out_;
  const Eigen::MatrixXd& N_;
  const double h_;
  std::map<mna::SwitchState, Configuration> configurations_;
};

}  // namespace

const char* method_name(ReferenceMethod method) {
  return method == ReferenceMethod::Trapezoidal ? "trapezoidal" : "bdf2";
}

ReferenceSolution integrate_reference(const Circuit& circuit, const mna::Network& network,
                                      double until, double every, ReferenceMethod method,
                                      const Eigen::VectorXd& x0, int substeps) {
  ReferenceSolution out;
  auto invalid = [&](const std::string& what) {
    out.diagnostics.push_back({Severity::Error, {}, "reference integrator: " + what, {}});
    return out;
  };
  if (!(until > 0) || !(every > 0) || !std::isfinite(until) || !std::isfinite(every)) {
    return invalid("until and every must be finite and above 0");
  }
  if (substeps < 1) return invalid("substeps must be at least 1");
  if (x0.size() != network.unknowns()) {
    return invalid("x0 has " + std::to_string(x0.size()) + " entries, the network " +
                   std::to_string(network.unknowns()) + " unknowns");
  }
  const double ratio = until / every;
  const double whole = std::round(ratio);
  const long samples =
      static_cast<long>(std::abs(ratio - whole) <= kWholeStepsTolerance * ratio ? whole : std::floor(ratio));
  const double h = every / substeps;
  const double same = kSameInstantFraction * h;
  const double t_end = samples * every;

  // Corners and switching instants, in time order.
  std::vector<Event> events;
  for (int element : network.input_elements()) {
    const Element& e = circuit.elements[static_cast<std::size_t>(element)];
    for (double t : e.waveform->corners(t_end)) events.push_back({t, -1, 0});
  }
  mna::SwitchState closed;
  for (std::size_t k = 0; k < network.switches().size(); ++k) {
    const Element& e = circuit.elements[static_cast<std::size_t>(network.switches()[k])];
    closed.push_back(e.waveform->value(0.0) > kGateLevel);  // state from 0 on
    for (const auto& [t, direction] : e.waveform->crossings(kGateLevel, t_end)) {
      events.push_back({t, static_cast<int>(k), direction});
    }
  }
  std::stable_sort(events.begin(), events.end(),
                   [](const Event& a, const Event& b) { return a.time < b.time; });

  Integrator integrator(circuit, network, out, h);
  out.times.resize(static_cast<std::size_t>(samples + 1));
  out.states.resize(network.unknowns(), samples + 1);

  Configuration* config = &integrator.configuration(closed);
  double t = 0;
  Eigen::VectorXd x = integrator.project(*config, x0, integrator.inputs(0.0));
  Eigen::VectorXd x_previous = x;
  bool uniform_history = false;  // x_previous is x(t - h) in this configuration
  ++out.restarts;
  out.times[0] = 0;
  out.states.col(0) = x;

  // One step of length s from t; false on failure.
  auto step = [&](double s) -> bool {
    const bool bdf2 = method == ReferenceMethod::Bdf2 && uniform_history && std::abs(s - h) <= same;
    const StepKind kind = bdf2 ? StepKind::Bdf2 : StepKind::Trapezoidal;
    const double length = std::abs(s - h) <= same ? h : s;  // reuse the factorization of h
    const auto* lu = integrator.step_matrix(*config, kind, length, t);
    if (!lu) return false;
    const Eigen::VectorXd u_end = integrator.inputs_before(t + s);
    Eigen::VectorXd rhs;
    if (bdf2) {
      rhs = config->d.C * (4.0 * x - x_previous) / (2.0 * length) + config->d.B * u_end;
    } else {
      rhs = (2.0 / length) * (config->d.C * x) - config->d.G * x +
            config->d.B * (integrator.inputs(t) + u_end);
    }
    Eigen::VectorXd next = lu->solve(rhs);
    if (!next.allFinite()) {
      integrator.fail(t + s, "the state is no longer finite");
      return false;
    }
    x_previous = x;
    x = std::move(next);
    uniform_history = std::abs(s - h) <= same;
    ++out.steps;
    return true;
  };

  // Apply every event at about `instant`, then restart consistently.
  std::size_t next_event = 0;
  auto handle_events_at = [&](double instant) {
    bool any = false;
    while (next_event < events.size() && events[next_event].time <= instant + same) {
      const Event& ev = events[next_event++];
      if (ev.switch_index >= 0) closed[static_cast<std::size_t>(ev.switch_index)] = ev.direction > 0;
      any = true;
    }
    if (!any) return;
    config = &integrator.configuration(closed);
    x = integrator.project(*config, x, integrator.inputs(instant));
    uniform_history = false;
    ++out.restarts;
  };
  handle_events_at(0.0);  // crossings reported at (about) 0 itself

  const long total_steps = samples * substeps;
  for (long i = 0; i < total_steps; ++i) {
    const double target = (samples > 0 && (i + 1) % substeps == 0)
                              ? static_cast<double>((i + 1) / substeps) * every
                              : static_cast<double>(i + 1) * h;
    // Events strictly inside this step: step to each, restart there.
    while (next_event < events.size() && events[next_event].time < target - same) {
      const double instant = events[next_event].time;
      if (instant > t + same) {
        if (!step(instant - t)) return out;
        t = instant;
      }
      handle_events_at(t);
    }
    if (target > t + same) {
      if (!step(target - t)) return out;
    }
    t = target;
    handle_events_at(t);  // an event on the step's end: the sample is its right limit
    if ((i + 1) % substeps == 0) {
      const long k = (i + 1) / substeps;
      out.times[static_cast<std::size_t>(k)] = t;
      out.states.col(k) = x;
    }
  }
  return out;
}

}  // namespace ringdown::solver
