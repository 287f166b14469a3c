// run_transient: the exact engine's driver (ARCHITECTURE.md, "Exact
// propagation"; transient.hpp is the public contract).
//
// Circuit -> mna::Network -> one reduction per switch configuration met ->
// initial state (DC with holds, or zero) -> the time axis cut at every
// waveform corner and switch instant -> on each interval the augmented
// system [x_s; w] stepped by cached dense propagators (or, for step lengths
// met once, the action of the exponential on the vector) -> at t = k*every
// the recorded signals evaluated from x, x' and u and streamed to the sink;
// with options.dense_output, checkpoints of X at the samples and on both sides of
// every event for the trajectory (dense_output.hpp); at the end, the output-step
// and run-length warnings from the natural modes (NETLIST.md section 7).
//
// `formula` sources and gates are replaced by their piecewise polynomial fits
// (formula_fit.hpp) before the events are built; their pieces carry the
// coefficients in the initial state w0 rather than in H, so the structure
// depends only on the piece length.
//
// Not here: figures, writers, the sparse engine.
#include "solver/transient.hpp"

#include <Eigen/Eigenvalues>
#include <algorithm>
#include <chrono>
#include <cmath>
#include <complex>
#include <cstring>
#include <limits>
#include <map>
#include <numbers>
#include <optional>
#include <stdexcept>
#include <string>
#include <unordered_map>

#include "mna/descriptor.hpp"
#include "parser/units.hpp"
#include "solver/dense_output.hpp"
#include "solver/formula_fit.hpp"
#include "solver/initial_state.hpp"
#include "solver/propagation.hpp"
#include "solver/signal_program.hpp"
#include "solver/source_model.hpp"
#include "solver/state_space.hpp"

namespace ringdown::solver {

namespace {

// NETLIST.md section 7: N = round(T/H) when T/H is within 1e-9 (relative)
// of a whole number, else floor(T/H).
constexpr double kWholeSlack = 1e-9;
// Instants closer than this many units of roundoff of the run's end are the
// same instant: corners computed as start + k*period and samples computed as
// k*every differ by a few ulps when they mean the same time (common practice,
// no source). Also the resolution of the step-length cache key.
constexpr double kInstantUlps = 16.0;
// A step length used this many times gets a dense propagator even when the
// action of the exponential would be cheaper once (a dense expm costs about
// as much as ten actions on a vector; Al-Mohy & Higham 2011, sec. 6, and our
// measurements).
constexpr int kDenseAfterUses = 3;
// Dense propagator instead of the action when the action would take more
// than this many matrix-vector products per state (stiff steps: the Taylor
// action needs ~||M h|| products, a dense expm ~ (10 + log2 ||M h||) n^3).
constexpr double kActionLimitPerState = 10.0;
// Cache of dense propagators: cleared when it would exceed this many bytes
// (memory stays O(n^2) with a constant that fits a workstation).
constexpr double kCacheBytes = 512.0 * 1024 * 1024;
// A mode counts as growing when its rate times the run's length exceeds
// this (grows by more than 0.1 % over the run) and it is not a rounding
// shadow of a lossless mode (rate below 1e-9 of its modulus).
constexpr double kGrowthOverRun = 1e-3;
constexpr double kGrowthRelative = 1e-9;
// Progress callbacks per run.
constexpr long kProgressCalls = 100;
// The output-step and run-length warnings (NETLIST.md section 7) read the eigen-
// decomposition of every configuration met, O(r^3) (about 0.02 s at 100 states on one
// core, more than a short run of such a network costs): above this many states they are
// skipped with a note, and bracket_step comes from Bendixson's bound instead.
constexpr Eigen::Index kModalStates = 100;
// A mode "shows" in a recorded signal when its visibility (dense_output.hpp: amplitude
// per unit stored energy, relative to the largest mode in that signal) is at least this
// for the warnings (a tenth of a percent is what a plot shows; common practice, no
// source), and at least kBracketVisible for bracket_step (figures hold 1e-9, so smaller
// ringing still has to be bracketed; ringing below this moves a figure by less).
constexpr double kShowVisible = 1e-3;
constexpr double kBracketVisible = 1e-6;
// A complex pair whose amplitude falls by more than e^27.6 (1e-12) in one period shows no
// ringing (zeta above about 0.975), and one whose period is below this many time
// resolutions cannot be told from a jump: neither counts as an oscillation.
constexpr double kRingDecayPerPeriod = 27.6;
constexpr double kMinPeriodInstants = 100.0;
// Warnings: the output step must be at most a third of the fastest period (NETLIST.md);
// the suggestion gives ten samples per period. The run must last five time constants.
constexpr double kAliasFraction = 1.0 / 3.0;
constexpr double kSuggestSamplesPerPeriod = 10.0;
constexpr double kSteadyTimeConstants = 5.0;
// bracket_step: a tenth of the fastest period (trajectory.hpp).
constexpr double kBracketFraction = 0.1;


std::string fmt_num(double v, const char* unit) { return format_si(v, unit); }

// The 1-2-5 series value at or below x (down) or at or above it (up), for suggestions.
double nice_125(double x, bool up) {
  if (!(x > 0) || !std::isfinite(x)) return x;
  const double decade = std::pow(10.0, std::floor(std::log10(x)));
  const double steps[] = {1, 2, 5, 10};
  if (up) {
    for (double s : steps)
      if (s * decade >= x * (1 - 1e-12)) return s * decade;
    return 10 * decade;
  }
  for (int i = 3; i >= 0; --i)
    if (steps[i] * decade <= x * (1 + 1e-12)) return steps[i] * decade;
  return decade;
}

// --- Engine state ------------------------------------------------------------

struct Configuration {
  mna::SwitchState closed;
  mna::Descriptor descriptor;
  StateSpace ss;
  double condition = 0;
  Eigen::MatrixXd Px, Pu, Pdu;  // base signals = Px x_s + Pu u + Pdu u'
};

struct PropagatorKey {
  int config, structure;
  long long length;
  bool operator==(const PropagatorKey& o) const {
    return config == o.config && structure == o.structure && length == o.length;
  }
};
struct PropagatorKeyHash {
  std::size_t operator()(const PropagatorKey& k) const {
    std::size_t h = std::hash<long long>()(k.length);
    h ^= std::hash<int>()(k.config) + 0x9e3779b97f4a7c15ULL + (h << 6) + (h >> 2);
    h ^= std::hash<int>()(k.structure) + 0x9e3779b97f4a7c15ULL + (h << 6) + (h >> 2);
    return h;
  }
};
struct PropagatorEntry {
  RunMatrix P;          // dense, or truncated sparse (propagation.hpp); empty: not built
  int uses = 0;
  TaylorPlan plan;      // of the action for this length (m < 0: not computed yet)
  bool action = false;  // stepped by the action for good: cheaper than a dense expm here
};

struct Segment {
  AugmentedSystem sys;
  Eigen::MatrixXd O;  // base signals = O X
  // When every recorded signal is one base signal (the common case: node voltages, currents),
  // their rows of O gathered once, row-major, so a sample is one small product straight
  // into the values (no per-signal program).
  Eigen::Matrix<double, Eigen::Dynamic, Eigen::Dynamic, Eigen::RowMajor> direct;
};

struct Composite {
  RunMatrix P;  // X(t + every) = P X(t); empty until built
  int uses = 0;
  bool refused = false;  // stiff: stepped with dense propagators instead
};

struct Event {
  double t = 0;
  std::vector<std::pair<int, double>> sources;  // (input j, its corner as computed)
  std::vector<std::pair<int, int>> switches;    // (switch k, direction)
};

class NumericalFailure : public std::runtime_error {
 public:
  using std::runtime_error::runtime_error;
};

std::string element_label(const Circuit& c, int e) {
  const Element& el = c.elements[static_cast<std::size_t>(e)];
  if (el.part >= 0) return c.parts[static_cast<std::size_t>(el.part)].name;
  return el.name;
}

std::string join_names(const std::vector<std::string>& names) {
  std::string out;
  for (std::size_t i = 0; i < names.size(); ++i) {
    if (i > 0) out += i + 1 == names.size() ? " and " : ", ";
    out += names[i];
  }
  return out;
}

class Engine {
 public:
  Engine(const Circuit& circuit, const std::vector<Signal>& signals,
         const TransientOptions& options, const SampleSink& sink, Diagnostics& diagnostics)
      : c_(circuit), signals_(signals), opt_(options), sink_(sink), diags_(diagnostics) {}

  TransientSummary run();

 private:
  const SourcePosition& run_where() const {
    static const SourcePosition none;
    return c_.transient ? c_.transient->where : none;
  }
  bool check_inputs();
  bool build_structure(double t_end);
  bool fit_formulas(double t_end);
  bool set_piece(std::size_t j, double t);
  int config_for(const mna::SwitchState& closed);  // -1 on failure (diagnostic added)
  void check_stability(int config);
  bool initial_state();
  int intern_structure();
  Segment& segment(int config, int structure);
  void advance(double h, long uses_left = 1);
  void handle(const Event& ev);
  std::vector<int> update_pieces(const Event& ev);
  void reseat(const Eigen::VectorXd& in, Eigen::VectorXd& out, int from, int to,
              const std::vector<int>& refreshed) const;
  void interval_with_corners(double t, double tn, std::size_t e_begin, std::size_t e_end,
                             const std::vector<Event>& events);
  bool steps_through_fitted(double t, double tn, std::size_t e_begin, std::size_t e_end,
                            const std::vector<Event>& events);
  void emit(double t);
  void deliver(double t);  // the tail of emit: checks, checkpoint, sink
  long steady_run(long k, long n_samples, double next_event);
  template <int N>
  long steady_fixed(long k, long n_samples, double next_event);
  [[noreturn]] void not_finite(double t) const;
  void keep(double t, bool left_limit);  // dense output: a checkpoint of X_ now
  void modal_checks();
  std::vector<Event> build_events(double t_end);
  void rebuild_state(const Eigen::VectorXd& xd, const std::vector<Eigen::VectorXd>& w);
  std::string unknown_label(int u) const;

  const Circuit& c_;
  const std::vector<Signal>& signals_;
  const TransientOptions& opt_;
  const SampleSink& sink_;
  Diagnostics& diags_;
  TransientSummary sum_;

  std::optional<mna::Network> own_net_;  // analysed here, when no kept structure is given
  const mna::Network* net_ = nullptr;
  DifferentialStructure topology_;
  StatePartition partition_;
  std::vector<int> cap_elements_;  // element index per capacitor branch
  std::vector<WaveformPtr> inputs_;
  std::vector<WaveformPtr> gates_;
  std::vector<int> input_elements_, gate_elements_;
  std::vector<const FittedFormula*> fitted_;  // per input: its fit, or null (exact)
  std::vector<std::size_t> fit_cursor_;       // per input: its fit's current piece
  std::vector<Configuration> configs_;
  std::map<mna::SwitchState, int> config_index_;
  std::vector<bool> stability_checked_;
  bool active_ = false;  // negative resistance or controlled source present
  int negative_resistor_ = -1;

  Compiler compiler_;
  std::vector<std::vector<Instr>> programs_;
  std::vector<double> stack_, values_;
  std::vector<Eigen::Index> direct_rows_;  // base of each signal, when all are plain loads
  Eigen::VectorXd base_;

  double time_scale_ = 1;
  double instant_ = 0;  // time resolution
  std::vector<SourcePiece> pieces_;
  std::vector<InputSystem> structures_;
  std::map<std::string, int> structure_index_;
  std::map<std::pair<int, int>, Segment> segments_;
  std::unordered_map<PropagatorKey, PropagatorEntry, PropagatorKeyHash> cache_;
  double cache_bytes_ = 0;
  PropagatorKey last_key_{-1, -1, 0};
  PropagatorEntry* last_entry_ = nullptr;  // into cache_ (node-based: stable)
  double last_h_ = -1;                     // the length last_key_ was made from
  const AugmentedSystem* last_sys_ = nullptr;  // its system (segments_ is node-based too)
  std::map<std::string, Composite> composites_;
  // Phi(h) = e^{A h}, the state block of every propagator of one configuration and step
  // length whatever the input structure: a second structure's propagator for that length
  // needs only its q input columns (actions on unit vectors), not a new dense expm.
  std::map<std::pair<int, long long>, Eigen::MatrixXd> state_blocks_;
  Eigen::Index states_ = 0;  // r, the same in every configuration

  int config_ = -1;
  int structure_ = -1;
  Segment* current_ = nullptr;  // segment(config_, structure_)
  mna::SwitchState closed_;
  Eigen::VectorXd X_, Y_, work1_, work2_;
  Eigen::VectorXd x_op_;  // unknowns at t = 0 (operating point)

  // Dense output (options.dense_output; null otherwise): checkpoints, the segments they
  // name (in first-met order), the extra signals' programs, every s-th sample kept.
  std::unique_ptr<DenseRecorder> dense_;
  long dense_stride_ = 1;
  std::map<std::pair<int, int>, int> dense_ids_;
  std::vector<std::pair<int, int>> dense_keys_;
  std::pair<int, int> dense_last_key_{-1, -1};
  int dense_last_id_ = -1;
  std::vector<std::vector<Instr>> extra_programs_;
  double bracket_step_ = 0;
  long progress_every_ = 1;
};

bool Engine::check_inputs() {
  bool ok = true;
  for (const Element& e : c_.elements) {
    const bool source = e.kind == ElementKind::VoltageSource || e.kind == ElementKind::CurrentSource;
    if ((source || e.kind == ElementKind::Switch) && e.waveform && !e.waveform->is_exact() &&
        !(opt_.formula_tolerance > 0 && std::isfinite(opt_.formula_tolerance)) && ok) {
      diags_.push_back(make_diagnostic(
          Severity::Error, e.where,
          "the formula tolerance must be a positive number (got " +
              fmt_num(opt_.formula_tolerance, "") + ")",
          "e.g. 1e-9: the fit's estimated error relative to the formula's peak"));
      ok = false;
    }
    if (e.kind == ElementKind::Resistor && e.value < 0) {
      active_ = true;
      if (negative_resistor_ < 0) negative_resistor_ = static_cast<int>(&e - c_.elements.data());
    }
    if (e.kind == ElementKind::Vcvs || e.kind == ElementKind::Vccs || e.kind == ElementKind::Ccvs ||
        e.kind == ElementKind::Cccs)
      active_ = true;
  }
  return ok;
}

std::string Engine::unknown_label(int u) const {
  const auto& names = net_->unknown_names();
  return u >= 0 && u < static_cast<int>(names.size()) ? names[static_cast<std::size_t>(u)]
                                                     : std::string("?");
}

bool Engine::build_structure(double t_end) {
  const mna::Network& net = *net_;
  StateElements states = state_elements(c_, net);
  topology_ = std::move(states.structure);
  cap_elements_ = std::move(states.capacitor_elements);
  for (int e : net.input_elements()) {
    inputs_.push_back(c_.elements[static_cast<std::size_t>(e)].waveform);
    input_elements_.push_back(e);
  }
  for (int e : net.switches()) {
    gates_.push_back(c_.elements[static_cast<std::size_t>(e)].waveform);
    gate_elements_.push_back(e);
  }
  return fit_formulas(t_end);
}

// formula() waveforms become their fits (formula_fit.hpp) for this run: sources carry the
// fitted pieces; gates keep the formula for their crossings, bracketed at the fit's knots.
bool Engine::fit_formulas(double t_end) {
  fitted_.assign(inputs_.size(), nullptr);
  fit_cursor_.assign(inputs_.size(), 0);
  FormulaFitOptions fo;
  fo.every = opt_.every;
  fo.t_end = t_end;
  fo.tolerance = opt_.formula_tolerance;
  fo.resolution = instant_;
  // Replaces w by its fit; `slot` (sources only) receives the fit.
  const auto fit = [&](WaveformPtr& w, int element, const FittedFormula** slot) -> bool {
    const bool source = slot != nullptr;
    if (!w || w->is_exact()) return true;
    const Element& el = c_.elements[static_cast<std::size_t>(element)];
    const std::string who = (source ? element_label(c_, element) : el.name + " gate") + ": " +
                            w->describe();
    const char* unit = el.kind == ElementKind::VoltageSource   ? "V"
                       : el.kind == ElementKind::CurrentSource ? "A"
                                                               : "";
    FormulaFitResult r = fit_formula(w, fo);
    if (!r.finite) {
      diags_.push_back(make_diagnostic(
          Severity::Error, el.where,
          who + " is not finite at t = " + fmt_num(r.bad_at, "s") + " (its value is " +
              (std::isnan(r.bad_value) ? std::string("NaN") : fmt_num(r.bad_value, unit)) + ")",
          "the expression must be defined over the whole run, from 0 to the last sample "
          "(guard a square root with max(0, ...), keep divisors away from 0)"));
      sum_.status = Status::BadInput;
      return false;
    }
    if (r.unbounded) {
      diags_.push_back(make_diagnostic(
          Severity::Error, el.where,
          who + " grows without bound near t = " + fmt_num(r.unbounded_at, "s") +
              " (its magnitude reaches " + fmt_num(r.unbounded_value, unit) +
              " and keeps growing closer in): no fit can follow it",
          "the expression must stay bounded over the whole run (a divisor that reaches 0?)"));
      sum_.status = Status::BadInput;
      return false;
    }
    if (source) {
      sum_.formula_error = std::max(sum_.formula_error, r.error);
      if (r.error > opt_.formula_tolerance) {
        std::string msg = who + ": the fit's estimated error is " + fmt_num(r.error, "") +
                          " of its peak (tolerance " + fmt_num(opt_.formula_tolerance, "") +
                          "), largest near t = " + fmt_num(r.worst_at, "s");
        msg += r.budget_reached ? "; the fit stopped at " + std::to_string(r.pieces) + " pieces"
                                : "; the formula is not smooth there (a kink or a jump) or is "
                                  "not smooth to rounding at this tolerance";
        diags_.push_back(make_diagnostic(
            Severity::Warning, el.where, msg,
            "write a jump or a kink with step, pulse or points (exact), or loosen the tolerance"));
      }
      *slot = r.waveform.get();
    }
    w = r.waveform;
    return true;
  };
  for (std::size_t j = 0; j < inputs_.size(); ++j)
    if (!fit(inputs_[j], input_elements_[j], &fitted_[j])) return false;
  for (std::size_t k = 0; k < gates_.size(); ++k)
    if (!fit(gates_[k], gate_elements_[k], nullptr)) return false;
  return true;
}

// The piece of input j from t on; true when its system (S, H) changed.
bool Engine::set_piece(std::size_t j, double t) {
  if (fitted_[j]) return fitted_source_piece(*fitted_[j], t, pieces_[j], &fit_cursor_[j]);
  pieces_[j] = source_piece(inputs_[j]->piece(t).terms, time_scale_);
  return true;
}

int Engine::config_for(const mna::SwitchState& closed) {
  auto it = config_index_.find(closed);
  if (it != config_index_.end()) return it->second;
  Configuration cfg;
  cfg.closed = closed;
  cfg.descriptor = net_->stamp(c_, closed);
  if (configs_.empty())
    partition_ = partition_states(topology_, net_->unknowns(), cfg.descriptor.C);
  ReductionResult red = reduce(cfg.descriptor, partition_);
  if (!red.ok) {
    std::vector<std::string> names;
    for (int u : red.unknowns) names.push_back(unknown_label(u));
    std::string msg = red.message;
    if (!names.empty()) msg += " (unknowns " + join_names(names) + ")";
    if (red.condition > 0 && std::isfinite(red.condition))
      msg += "; condition estimate " + fmt_num(red.condition, "");
    diags_.push_back(make_diagnostic(Severity::Error, run_where(), msg,
                          "a node reached only through inductors needs a resistor to the rest of "
                          "the network (rpar= on an inductor)"));
    sum_.status = Status::BadInput;
    return -1;
  }
  cfg.ss = std::move(red.system);
  cfg.condition = red.condition;
  // Output maps of the base signals for this configuration.
  const auto nb = static_cast<Eigen::Index>(compiler_.bases.size());
  const auto n = static_cast<Eigen::Index>(net_->unknowns());
  const auto m = static_cast<Eigen::Index>(net_->inputs());
  Eigen::MatrixXd Lx = Eigen::MatrixXd::Zero(nb, n), Ldx = Eigen::MatrixXd::Zero(nb, n),
                  Lu = Eigen::MatrixXd::Zero(nb, m);
  for (Eigen::Index b = 0; b < nb; ++b) {
    const BaseRef ref = compiler_.bases[static_cast<std::size_t>(b)];
    mna::LinearMap map;
    switch (ref.kind) {
      case BaseKind::Node: map = net_->node_voltage(ref.index); break;
      case BaseKind::PartVoltage: map = net_->part_voltage(c_, ref.index); break;
      case BaseKind::PartCurrent: map = net_->part_current(c_, ref.index, closed); break;
      case BaseKind::CapVoltage: map = net_->capacitance_voltage(c_, ref.index); break;
      case BaseKind::IndCurrent: map = net_->inductance_current(c_, ref.index); break;
      case BaseKind::ElementCurrent: map = net_->element_current(c_, ref.index, closed); break;
    }
    if (map.x_row.size() == n) Lx.row(b) = map.x_row;
    if (map.dx_row.size() == n) Ldx.row(b) = map.dx_row;
    if (map.u_row.size() == m) Lu.row(b) = map.u_row;
  }
  // x = T x_s + D u,  x' = T (A x_s + B u) + D u'.
  const StateSpace& s = cfg.ss;
  // (Ldx T) first: nb x n x r and nb x r x r, not n x r x r (a 1000-state ladder's T A
  // cost more than the rest of its set-up).
  const Eigen::MatrixXd LdxT = Ldx * s.T;
  cfg.Px = Lx * s.T + LdxT * s.A;
  cfg.Pu = Lx * s.D + LdxT * s.B + Lu;
  cfg.Pdu = Ldx * s.D;
  const int id = static_cast<int>(configs_.size());
  configs_.push_back(std::move(cfg));
  config_index_[closed] = id;
  stability_checked_.push_back(false);
  return id;
}

void Engine::check_stability(int config) {
  if (!active_ || stability_checked_[static_cast<std::size_t>(config)]) return;
  stability_checked_[static_cast<std::size_t>(config)] = true;
  const StateSpace& s = configs_[static_cast<std::size_t>(config)].ss;
  if (s.A.rows() == 0) return;
  Eigen::EigenSolver<Eigen::MatrixXd> es(s.A, true);
  if (es.info() != Eigen::Success) return;
  const auto& lam = es.eigenvalues();
  Eigen::Index worst = -1;
  for (Eigen::Index i = 0; i < lam.size(); ++i) {
    const double re = lam(i).real();
    if (re * opt_.until > kGrowthOverRun && re > kGrowthRelative * std::abs(lam(i)) &&
        (worst < 0 || re > lam(worst).real()))
      worst = i;
  }
  if (worst < 0) return;
  const double rate = lam(worst).real();
  const double freq = std::abs(lam(worst).imag()) / (2 * std::numbers::pi);
  // Participation: eigenvector entries weighted by sqrt(|C11_ii|) (the
  // square root of the stored energy each state carries).
  Eigen::VectorXd weight(s.A.rows());
  for (Eigen::Index i = 0; i < s.A.rows(); ++i)
    weight(i) = std::abs(es.eigenvectors()(i, worst)) * std::sqrt(std::abs(s.C11(i, i)));
  std::vector<Eigen::Index> order(static_cast<std::size_t>(weight.size()));
  for (Eigen::Index i = 0; i < weight.size(); ++i) order[static_cast<std::size_t>(i)] = i;
  std::sort(order.begin(), order.end(), [&](auto a, auto b) { return weight(a) > weight(b); });
  std::vector<std::string> names;
  for (std::size_t i = 0; i < order.size() && i < 3; ++i) {
    if (weight(order[i]) < 0.1 * weight(order[0])) break;
    const auto k = static_cast<std::size_t>(order[i]);
    std::string name = unknown_label(partition_.state_unknown[k]);
    if (partition_.state_root[k] >= 0) name += " - " + unknown_label(partition_.state_root[k]);
    names.push_back(name);
  }
  std::string msg = "the network is unstable: a natural mode grows at " + fmt_num(rate, "1/s") +
                    " (doubling every " + fmt_num(std::log(2.0) / rate, "s") + ")";
  if (freq > 0) msg += ", oscillating at " + fmt_num(freq, "Hz");
  msg += "; the states taking part most: " + join_names(names) +
         "; the results grow exactly as the linear equations say";
  const SourcePosition& where =
      negative_resistor_ >= 0 ? c_.elements[static_cast<std::size_t>(negative_resistor_)].where
                              : run_where();
  diags_.push_back(make_diagnostic(Severity::Warning, where, msg));
}

// The output-step and run-length warnings (NETLIST.md section 7) and bracket_step, from the
// natural modes of every configuration met and the oscillations of the sources' pieces.
void Engine::modal_checks() {
  const std::size_t nb = compiler_.bases.size();
  std::vector<char> streamed(nb, 0), kept(nb, 0);
  for (const auto& p : programs_)
    for (const Instr& in : p)
      if (in.kind == Instr::Load) streamed[static_cast<std::size_t>(in.base)] = kept[static_cast<std::size_t>(in.base)] = 1;
  for (const auto& p : extra_programs_)
    for (const Instr& in : p)
      if (in.kind == Instr::Load) kept[static_cast<std::size_t>(in.base)] = 1;
  const double min_period = kMinPeriodInstants * instant_;
  const auto rings = [&](std::complex<double> pole) {
    const double w = std::abs(pole.imag());
    if (!(w > 0)) return false;
    const double period = 2 * std::numbers::pi / w;
    return period >= min_period && -pole.real() * period < kRingDecayPerPeriod;
  };
  double alias_w = 0, bracket_w = 0;
  std::string alias_what;
  std::optional<std::complex<double>> slow;
  Eigen::Index skipped_states = 0;
  bool alias_unknown = false;
  std::vector<SeenMode> modes;
  for (const Configuration& cfg : configs_) {
    const StateSpace& s = cfg.ss;
    const Eigen::Index r = s.A.rows();
    if (r == 0) continue;
    if (r > kModalStates || !seen_modes(s.A, s.C11, cfg.Px, modes)) {
      skipped_states = std::max(skipped_states, r);
      const double bound = oscillation_bound(s.A, s.C11);
      bracket_w = std::max(bracket_w, bound);
      if (bound > 0 && opt_.every > kAliasFraction * 2 * std::numbers::pi / bound)
        alias_unknown = true;
      continue;
    }
    const double zero = 64 * std::numeric_limits<double>::epsilon() * s.A.lpNorm<1>();
    for (const SeenMode& m : modes) {
      if (std::abs(m.pole) <= zero) continue;  // a constant mode: conserved charge or flux
      double show = 0, keep_vis = 0;
      for (std::size_t b = 0; b < nb; ++b) {
        if (streamed[b]) show = std::max(show, m.visibility[b]);
        if (kept[b]) keep_vis = std::max(keep_vis, m.visibility[b]);
      }
      if (rings(m.pole)) {
        const double w = m.pole.imag();
        if (show >= kShowVisible && w > alias_w) {
          alias_w = w;
          alias_what = "a natural mode at " + fmt_num(w / (2 * std::numbers::pi), "Hz");
        }
        if (keep_vis >= kBracketVisible) bracket_w = std::max(bracket_w, w);
      }
      // Decaying (not growing, not lossless): the slowest one sets the steady state.
      const double rate = -m.pole.real();
      if (rate > kGrowthRelative * std::abs(m.pole) && show >= kShowVisible &&
          (!slow || rate < -slow->real()))
        slow = m.pole;
    }
  }
  // The sources' own oscillations (sine pieces): S's eigenvalues, per input block.
  const std::vector<int>& input_elements = net_->input_elements();
  for (const InputSystem& in : structures_) {
    for (std::size_t j = 0; j < in.offset.size(); ++j) {
      if (in.size[j] < 2) continue;
      const Eigen::MatrixXd S = in.S.block(in.offset[j], in.offset[j], in.size[j], in.size[j]);
      Eigen::EigenSolver<Eigen::MatrixXd> es(S, false);
      if (es.info() != Eigen::Success) continue;
      for (Eigen::Index i = 0; i < es.eigenvalues().size(); ++i) {
        const std::complex<double> pole = es.eigenvalues()(i);
        if (!rings(pole)) continue;
        const double w = std::abs(pole.imag());
        bracket_w = std::max(bracket_w, w);
        if (w > alias_w) {
          alias_w = w;
          alias_what = "the waveform of " +
                       element_label(c_, input_elements[j]) + " at " +
                       fmt_num(w / (2 * std::numbers::pi), "Hz");
        }
      }
    }
  }
  bracket_step_ = bracket_w > 0 ? kBracketFraction * 2 * std::numbers::pi / bracket_w : 0;

  if (alias_w > 0) {
    const double period = 2 * std::numbers::pi / alias_w;
    if (opt_.every > kAliasFraction * period) {
      diags_.push_back(make_diagnostic(
          Severity::Warning, run_where(),
          "the output step every=" + fmt_num(opt_.every, "s") +
              " is coarser than a third of the period of the fastest oscillation the recorded "
              "signals show, " + alias_what + " (period " + fmt_num(period, "s") +
              "); figures stay exact; plots and CSV may alias",
          "every=" + fmt_num(nice_125(period / kSuggestSamplesPerPeriod, false), "s") +
              " gives ten samples per period"));
    }
  }
  if (slow) {
    const double tau = -1 / slow->real();
    if (opt_.until < kSteadyTimeConstants * tau) {
      std::string what = "time constant " + fmt_num(tau, "s");
      if (slow->imag() > 0)
        what += ", ringing at " + fmt_num(slow->imag() / (2 * std::numbers::pi), "Hz");
      diags_.push_back(make_diagnostic(
          Severity::Warning, run_where(),
          "the run (until=" + fmt_num(opt_.until, "s") +
              ") is shorter than five time constants of the slowest decaying mode the recorded "
              "signals show (" + what + "); `final` is then not the steady state",
          "until=" + fmt_num(nice_125(kSteadyTimeConstants * tau, true), "s") +
              " lasts five time constants"));
    }
  }
  if (skipped_states > 0) {
    std::string which = alias_unknown ? "the output step against the fastest mode and the run's "
                                        "length against the slowest were"
                                      : "the run's length against the slowest mode was";
    diags_.push_back(make_diagnostic(
        Severity::Note, run_where(),
        "not checked: " + which + " (the network has " + std::to_string(skipped_states) +
            " states; the eigen-analysis this needs is done up to " +
            std::to_string(kModalStates) + ")",
        "`ringdown modes` lists the natural modes"));
  }
}

bool Engine::initial_state() {
  const mna::Network& net = *net_;
  const mna::SwitchState before = net.initial_switches();
  const int cfg0 = config_for(before);
  if (cfg0 < 0) return false;
  const Configuration& c0 = configs_[static_cast<std::size_t>(cfg0)];
  const auto m = static_cast<Eigen::Index>(inputs_.size());
  Eigen::VectorXd u0(m);
  for (Eigen::Index j = 0; j < m; ++j) u0(j) = inputs_[static_cast<std::size_t>(j)]->value_before_zero();

  std::vector<CapacitorHold> caps;
  std::vector<InductorHold> inds;
  for (std::size_t e = 0; e < c_.elements.size(); ++e) {
    const Element& el = c_.elements[e];
    if (el.kind == ElementKind::Capacitor && el.v0)
      caps.push_back({net.node_unknown(el.a), net.node_unknown(el.b), *el.v0, static_cast<int>(e)});
    if (el.kind == ElementKind::Inductor && el.i0)
      inds.push_back({net.branch_unknown(static_cast<int>(e)), *el.i0, static_cast<int>(e)});
  }
  Eigen::VectorXd xd;
  if (opt_.initial_dc) {
    DcProblem p;
    p.G = c0.descriptor.G;
    p.rhs = c0.descriptor.B * u0;
    p.weights = c0.descriptor.C.diagonal().cwiseAbs();
    p.capacitors = caps;
    p.inductors = inds;
    DcSolution s = solve_dc(p);
    if (!s.ok) {
      // Name what the inconsistent equations belong to.
      std::vector<std::string> names;
      const int n = net.unknowns();
      std::vector<int> branch_element(static_cast<std::size_t>(n), -1);
      for (std::size_t e = 0; e < c_.elements.size(); ++e) {
        const int u = net.branch_unknown(static_cast<int>(e));
        if (u >= 0) branch_element[static_cast<std::size_t>(u)] = static_cast<int>(e);
      }
      for (int row : s.rows) {
        std::string name;
        if (row >= n) {
          name = element_label(c_, caps[static_cast<std::size_t>(row - n)].element) + " (v0)";
        } else if (branch_element[static_cast<std::size_t>(row)] >= 0) {
          const int e = branch_element[static_cast<std::size_t>(row)];
          name = element_label(c_, e);
          if (c_.elements[static_cast<std::size_t>(e)].i0) name += " (i0)";
        } else {
          name = "the currents at " + unknown_label(row);
        }
        if (std::find(names.begin(), names.end(), name) == names.end()) names.push_back(name);
      }
      std::string msg = s.rows.empty()
                            ? "the DC operating point could not be computed (condition estimate " +
                                  fmt_num(s.condition, "") + ")"
                            : "the initial holds contradict the network at DC: " + join_names(names);
      diags_.push_back(make_diagnostic(Severity::Error, run_where(), msg,
                            "change v0/i0 so they agree, or use `initial=zero`"));
      sum_.status = Status::BadInput;
      return false;
    }
    if (s.singular) {
      diags_.push_back(make_diagnostic(Severity::Note, run_where(),
                            "the DC operating point leaves a circulating current (a loop of "
                            "inductances) undetermined; it starts with no circulating flux"));
    }
    x_op_ = s.x;
    xd = states_from_unknowns(partition_, s.x);
  } else {
    std::vector<int> conflict;
    if (!zero_state(partition_, topology_.capacitor_branches, caps, inds, xd, conflict)) {
      std::vector<std::string> names;
      for (int e : conflict)
        if (e >= 0) names.push_back(element_label(c_, e));
      diags_.push_back(make_diagnostic(Severity::Error, run_where(),
                            "contradictory initial voltages: " + join_names(names) +
                                " are held at different voltages across the same nodes",
                            "give them the same v0, or drop one"));
      sum_.status = Status::BadInput;
      return false;
    }
    x_op_ = c0.ss.T * xd + c0.ss.D * u0;
  }
  closed_ = before;
  config_ = cfg0;
  // Operating point entries (the state at t = 0 after holds).
  for (std::size_t k = 1; k < c_.nodes.size(); ++k) {
    if (c_.nodes[k].hidden) continue;
    const int u = net.node_unknown(static_cast<int>(k));
    if (u >= 0) sum_.operating_point.push_back({c_.nodes[k].name, x_op_(u), Dimension::volt()});
  }
  for (const Part& part : c_.parts) {
    if (part.main < 0) continue;
    const int u = net.branch_unknown(part.main);
    if (u < 0) continue;
    if (part.kind == ElementKind::Inductor)
      sum_.operating_point.push_back({part.name + ".il", x_op_(u), Dimension::ampere()});
    else if (part.kind == ElementKind::VoltageSource)
      sum_.operating_point.push_back({part.name + ".i", x_op_(u), Dimension::ampere()});
  }
  // Initial pieces at t = 0 (right-continuous).
  pieces_.assign(inputs_.size(), SourcePiece{});
  for (std::size_t j = 0; j < inputs_.size(); ++j) set_piece(j, 0.0);
  std::vector<Eigen::VectorXd> w;
  for (const auto& p : pieces_) w.push_back(p.w0);
  structure_ = intern_structure();
  rebuild_state(xd, w);
  return true;
}

int Engine::intern_structure() {
  InputSystem sys = assemble_inputs(pieces_);
  std::string key;
  const auto put = [&key](const Eigen::MatrixXd& M) {
    const Eigen::Index dims[2] = {M.rows(), M.cols()};
    key.append(reinterpret_cast<const char*>(dims), sizeof dims);
    key.append(reinterpret_cast<const char*>(M.data()),
               sizeof(double) * static_cast<std::size_t>(M.size()));
  };
  put(sys.S);
  put(sys.H);
  auto it = structure_index_.find(key);
  if (it != structure_index_.end()) return it->second;
  const int id = static_cast<int>(structures_.size());
  structures_.push_back(std::move(sys));
  structure_index_.emplace(std::move(key), id);
  return id;
}

Segment& Engine::segment(int config, int structure) {
  auto it = segments_.find({config, structure});
  if (it != segments_.end()) return it->second;
  const Configuration& cfg = configs_[static_cast<std::size_t>(config)];
  const InputSystem& in = structures_[static_cast<std::size_t>(structure)];
  Segment seg;
  seg.sys = make_augmented(cfg.ss.A, cfg.ss.B, cfg.ss.C11, cfg.ss.Gs, cfg.ss.Bs, in.S, in.H);
  const Eigen::Index r = cfg.ss.A.rows();
  const Eigen::Index q = in.S.rows();
  seg.O.resize(cfg.Px.rows(), r + q);
  seg.O.leftCols(r) = cfg.Px;
  seg.O.rightCols(q) = cfg.Pu * in.H + cfg.Pdu * (in.H * in.S);
  if (!direct_rows_.empty()) {
    seg.direct.resize(static_cast<Eigen::Index>(direct_rows_.size()), r + q);
    for (std::size_t k = 0; k < direct_rows_.size(); ++k)
      seg.direct.row(static_cast<Eigen::Index>(k)) = seg.O.row(direct_rows_[k]);
  }
  return segments_.emplace(std::make_pair(config, structure), std::move(seg)).first->second;
}

void Engine::rebuild_state(const Eigen::VectorXd& xd, const std::vector<Eigen::VectorXd>& w) {
  const InputSystem& in = structures_[static_cast<std::size_t>(structure_)];
  const Eigen::Index r = xd.size();
  states_ = r;
  const Eigen::Index N = r + in.S.rows();
  X_.resize(N);
  Y_.resize(N);
  X_.head(r) = xd;
  X_(r) = 1.0;  // the shared unit state
  for (std::size_t j = 0; j < w.size(); ++j)
    X_.segment(r + in.offset[j], in.size[j]) = w[j];
}

// One step of length h. `uses_left`: how many more times the caller expects to take this
// length (the remaining samples for the full output step): a sparse system whose action over
// those steps costs less than one dense expm is stepped by the action for good.
void Engine::advance(double h, long uses_left) {
  if (!(h > 0)) return;
  Y_.resize(X_.size());  // no-op unless a corner changed the input structure
  // One-entry memo: the steady case (the same full step every sample) skips
  // the key's rounding and the hash lookup.
  if (last_entry_ && h == last_h_ && last_key_.config == config_ &&
      last_key_.structure == structure_) {
    if (!last_entry_->P.empty()) {
      last_entry_->P.apply(X_, Y_);
    } else {
      expm_action(*last_sys_, h, last_entry_->plan, X_, Y_, work1_, work2_);
    }
    X_.swap(Y_);
    return;
  }
  const PropagatorKey key{config_, structure_, std::llround(h / instant_)};
  // The one-entry memo above, set to the entry this step uses.
  const auto remember = [&](PropagatorEntry* e, const AugmentedSystem& sys) {
    last_key_ = key;
    last_entry_ = e;
    last_h_ = h;
    last_sys_ = &sys;
  };
  PropagatorEntry* entry = nullptr;
  if (last_entry_ && last_key_ == key) {
    entry = last_entry_;
  } else {
    auto it = cache_.find(key);
    if (it != cache_.end()) entry = &it->second;
  }
  if (entry && !entry->P.empty()) {
    remember(entry, segment(config_, structure_).sys);
    entry->P.apply(X_, Y_);
    X_.swap(Y_);
    return;
  }
  Segment& seg = segment(config_, structure_);
  if (entry && entry->action) {
    remember(entry, seg.sys);
    expm_action(seg.sys, h, entry->plan, X_, Y_, work1_, work2_);
    X_.swap(Y_);
    return;
  }
  const Eigen::Index N = seg.sys.M.rows();
  if (!entry) entry = &cache_[key];
  ++entry->uses;
  if (entry->plan.m < 0) entry->plan = plan_action(seg.sys, h);
  const long action = entry->plan.products();
  const bool stiff = static_cast<double>(action) > kActionLimitPerState * static_cast<double>(N);
  bool dense = entry->uses >= kDenseAfterUses || stiff;
  // A large sparse system, not stiff here: its propagator comes from the action on the N
  // unit vectors at once (propagator_by_action, about N actions' work, far below a dense
  // expm), and is kept only when it truncates to a product cheaper than one action. Built
  // when the run has at least N more such steps, so it costs at most what stepping by the
  // action would; otherwise, or when it does not truncate, the action for good.
  bool by_action = false;
  if (dense && !stiff && seg.sys.use_sparse) {
    // Expected further uses: what the caller says, or as many as so far.
    const double uses = static_cast<double>(std::max<long>(uses_left, entry->uses));
    by_action = uses >= static_cast<double>(N);
    if (!by_action) {
      dense = false;
      entry->action = true;
      remember(entry, seg.sys);
    }
  }
  if (dense) {
    const double bytes = 8.0 * static_cast<double>(N * N);  // at most (truncation shrinks it)
    if (cache_bytes_ + bytes > kCacheBytes) {
      last_entry_ = nullptr;
      cache_.clear();
      state_blocks_.clear();
      cache_bytes_ = 0;
      entry = &cache_[key];
      entry->plan = plan_action(seg.sys, h);
    }
    Eigen::MatrixXd P;
    const Eigen::Index r = states_;
    const auto block = state_blocks_.find({config_, key.length});
    const bool from_block = block != state_blocks_.end() && !stiff && seg.sys.use_sparse;
    if (from_block) {
      // [[Phi, G], [0, W]]: Phi known, the input columns by actions on unit vectors. Only on
      // large sparse systems, where a dense expm is costly; small ones keep the
      // stiff-accurate propagator for every structure.
      P = Eigen::MatrixXd::Zero(N, N);
      P.topLeftCorner(r, r) = block->second;
      Eigen::VectorXd v, y;
      for (Eigen::Index j = r; j < N; ++j) {
        v = Eigen::VectorXd::Unit(N, j);
        expm_action(seg.sys, h, entry->plan, v, y, work1_, work2_);
        P.col(j) = y;
      }
    } else if (by_action) {
      P = propagator_by_action(seg.sys, h);
      ++sum_.propagators_built;
    } else {
      try {
        P = dense_propagator(seg.sys, h);
      } catch (const std::exception& ex) {
        throw NumericalFailure(std::string("the matrix exponential failed: ") + ex.what());
      }
      ++sum_.propagators_built;
    }
    if (!P.allFinite())
      throw NumericalFailure("the propagator over " + fmt_num(h, "s") + " is not finite");
    if (!from_block) {  // its state block, for the configuration's other input structures
      state_blocks_.emplace(std::make_pair(config_, key.length), P.topLeftCorner(r, r));
      cache_bytes_ += 8.0 * static_cast<double>(r * r);
    }
    entry->P = run_matrix(std::move(P), seg.sys.scale, seg.sys.scale);
    if (by_action && !(entry->P.is_sparse && 2.0 * static_cast<double>(entry->P.run_values.size()) <
                                                 action_flops(seg.sys, entry->plan))) {
      entry->P = RunMatrix();  // does not pay: the action for good
      entry->action = true;
      remember(entry, seg.sys);
      expm_action(seg.sys, h, entry->plan, X_, Y_, work1_, work2_);
      X_.swap(Y_);
      return;
    }
    if (entry->P.is_sparse) ++sum_.sparse_propagators;
    cache_bytes_ += entry->P.bytes();
    entry->P.apply(X_, Y_);
  } else {
    expm_action(seg.sys, h, entry->plan, X_, Y_, work1_, work2_);
  }
  X_.swap(Y_);
}

std::vector<Event> Engine::build_events(double t_end) {
  struct Raw {
    double t;
    int kind;  // 0 source, 1 switch
    int index;
    int dir;
  };
  std::vector<Raw> raw;
  for (std::size_t j = 0; j < inputs_.size(); ++j)
    for (double t : inputs_[j]->corners(t_end)) raw.push_back({t, 0, static_cast<int>(j), 0});
  for (std::size_t k = 0; k < gates_.size(); ++k)
    for (const auto& [t, dir] : gates_[k]->crossings(0.5, t_end))
      raw.push_back({t, 1, static_cast<int>(k), dir});
  std::sort(raw.begin(), raw.end(), [](const Raw& a, const Raw& b) { return a.t < b.t; });
  std::vector<Event> out;
  for (std::size_t i = 0; i < raw.size();) {
    Event ev;
    const double t0 = raw[i].t;
    std::size_t j = i;
    for (; j < raw.size() && raw[j].t - t0 <= instant_; ++j) {
      if (raw[j].kind == 0) {
        bool merged = false;
        for (auto& s : ev.sources)
          if (s.first == raw[j].index) {
            s.second = std::max(s.second, raw[j].t);
            merged = true;
          }
        if (!merged) ev.sources.emplace_back(raw[j].index, raw[j].t);
      } else {
        bool merged = false;
        for (auto& s : ev.switches)
          if (s.first == raw[j].index) {
            s.second = raw[j].dir;
            merged = true;
          }
        if (!merged) ev.switches.emplace_back(raw[j].index, raw[j].dir);
      }
    }
    // Snap to the sample grid (or to 0) when within the time resolution.
    const double k = std::round(t0 / opt_.every);
    ev.t = std::abs(t0 - k * opt_.every) <= instant_ ? k * opt_.every : t0;
    if (ev.t < instant_) ev.t = 0;
    out.push_back(std::move(ev));
    i = j;
  }
  return out;
}

std::vector<int> Engine::update_pieces(const Event& ev) {
  std::vector<int> refreshed;
  bool changed = false;
  for (const auto& [j, corner] : ev.sources) {
    changed = set_piece(static_cast<std::size_t>(j), corner) || changed;
    refreshed.push_back(j);
  }
  if (changed) structure_ = intern_structure();
  return refreshed;
}

void Engine::reseat(const Eigen::VectorXd& in, Eigen::VectorXd& out, int from, int to,
                    const std::vector<int>& refreshed) const {
  const InputSystem& a = structures_[static_cast<std::size_t>(from)];
  const InputSystem& b = structures_[static_cast<std::size_t>(to)];
  const Eigen::Index r = states_;
  out.resize(r + b.S.rows());
  out.head(r) = in.head(r);
  out(r) = in(r);  // the shared unit state
  for (std::size_t j = 0; j < b.offset.size(); ++j) {
    const bool fresh = std::find(refreshed.begin(), refreshed.end(), static_cast<int>(j)) !=
                       refreshed.end();
    if (fresh && fitted_[j])  // a fit's coefficients: its current piece's (set_piece)
      out.segment(r + b.offset[j], b.size[j]) = pieces_[j].w0 * in(r);
    else if (fresh)
      out.segment(r + b.offset[j], b.size[j]) = b.w0.segment(b.offset[j], b.size[j]) * in(r);
    else
      out.segment(r + b.offset[j], b.size[j]) = in.segment(r + a.offset[j], a.size[j]);
  }
}

void Engine::handle(const Event& ev) {
  if (dense_) keep(ev.t, true);
  ++sum_.segments;
  const int from = structure_;
  const std::vector<int> refreshed = update_pieces(ev);
  if (!ev.switches.empty()) {
    mna::SwitchState next = closed_;
    for (const auto& [k, dir] : ev.switches) next[static_cast<std::size_t>(k)] = dir > 0;
    if (next != closed_) {
      ++sum_.switch_events;
      const int cfg = config_for(next);
      if (cfg < 0) throw NumericalFailure("");  // diagnostic already added
      closed_ = std::move(next);
      config_ = cfg;
      check_stability(cfg);
    }
  }
  // The physical state x_s is the same in every configuration (switches
  // change G only); sources restart at their new piece.
  reseat(X_, Y_, from, structure_, refreshed);
  X_.swap(Y_);
  current_ = nullptr;
  if (dense_) keep(ev.t, false);
}

void Engine::keep(double t, bool left_limit) {
  const std::pair<int, int> key{config_, structure_};
  if (key != dense_last_key_) {
    const auto [it, fresh] = dense_ids_.emplace(key, static_cast<int>(dense_keys_.size()));
    if (fresh) {
      dense_keys_.push_back(key);
      segment(config_, structure_);  // its output map, kept for the trajectory
    }
    dense_last_key_ = key;
    dense_last_id_ = it->second;
  }
  dense_->keep(t, dense_last_id_, X_, left_limit);
}

// An interval in which a fitted formula starts new pieces: their coefficients are data in
// the state, not structure, so a pattern matrix cannot be reused; step event by event
// (the sub-step lengths repeat, so their propagators are cached). False: none does.
bool Engine::steps_through_fitted(double t, double tn, std::size_t e_begin, std::size_t e_end,
                                  const std::vector<Event>& events) {
  bool any = false;
  for (std::size_t i = e_begin; i < e_end && !any; ++i)
    for (const auto& src : events[i].sources)
      any = any || fitted_[static_cast<std::size_t>(src.first)] != nullptr;
  if (!any) return false;
  double tprev = t;
  for (std::size_t i = e_begin; i < e_end; ++i) {
    advance(events[i].t - tprev);
    tprev = events[i].t;
    handle(events[i]);
  }
  advance(tn - tprev);
  return true;
}

// One output interval [t, t + every] with source corners strictly inside and
// no switching: the map from X(t) to X(t + every) is linear, so when the same
// pattern of corners recurs (pulse trains) it is cached as one matrix,
// [[Phi(every), G], [0, W]]: its state block is the full step's and only the
// q input columns are new, computed by the action of the exponential on q
// unit vectors. A new pattern is stepped directly (actions on X).
void Engine::interval_with_corners(double t, double tn, std::size_t e_begin, std::size_t e_end,
                                   const std::vector<Event>& events) {
  if (steps_through_fitted(t, tn, e_begin, e_end, events)) return;
  struct Step {
    double length;
    int structure;            // structure during this step
    std::vector<int> refreshed;  // sources restarted at its end
    int next;                 // structure after its end
  };
  std::vector<Step> steps;
  const int s_start = structure_;
  std::string key;
  auto put = [&key](long long v) { key.append(reinterpret_cast<const char*>(&v), sizeof v); };
  put(config_);
  put(s_start);
  double tprev = t;
  for (std::size_t i = e_begin; i < e_end; ++i) {
    Step st;
    st.length = events[i].t - tprev;
    st.structure = structure_;
    st.refreshed = update_pieces(events[i]);
    st.next = structure_;
    tprev = events[i].t;
    put(std::llround((events[i].t - t) / instant_));
    put(st.next);
    for (int j : st.refreshed) put(j);
    put(-1);
    steps.push_back(std::move(st));
  }
  steps.push_back({tn - tprev, structure_, {}, structure_});
  sum_.segments += e_end - e_begin;
  current_ = nullptr;

  // Step directly; with dense output, checkpoints on both sides of each corner.
  const auto step_directly = [&]() {
    for (std::size_t i = 0; i < steps.size(); ++i) {
      const Step& st = steps[i];
      structure_ = st.structure;
      advance(st.length);
      const bool corner = dense_ && i + 1 < steps.size();
      if (corner) keep(events[e_begin + i].t, true);
      if (st.next != st.structure || !st.refreshed.empty()) {
        reseat(X_, Y_, st.structure, st.next, st.refreshed);
        X_.swap(Y_);
      }
      if (corner) {
        structure_ = st.next;
        keep(events[e_begin + i].t, false);
      }
    }
    structure_ = steps.back().next;
  };
  auto found = composites_.find(key);
  if (found != composites_.end() && !found->second.P.empty()) {
    if (dense_) {  // the corners' states for the trajectory; the sample from the matrix
      const Eigen::VectorXd start = X_;
      step_directly();
      X_ = start;
    }
    found->second.P.apply(X_, Y_);
    X_.swap(Y_);
    return;
  }
  Composite& comp = composites_[key];
  ++comp.uses;
  step_directly();
  if (comp.uses < 2 || comp.refused) return;
  // Second time this pattern: build its matrix, if every step is cheap by
  // the action (not stiff).
  for (const Step& st : steps) {
    const Segment& seg = segment(config_, st.structure);
    if (static_cast<double>(expm_action_cost(seg.sys, st.length)) >
        kActionLimitPerState * static_cast<double>(seg.sys.M.rows())) {
      comp.refused = true;
      return;
    }
  }
  const Eigen::Index r = states_;
  const Eigen::Index q0 = structures_[static_cast<std::size_t>(s_start)].S.rows();
  const Eigen::Index q1 = structures_[static_cast<std::size_t>(structure_)].S.rows();
  Eigen::MatrixXd P = Eigen::MatrixXd::Zero(r + q1, r + q0);
  // State block: Phi(every), from the full-step propagator of the start.
  {
    const std::pair<int, long long> full{config_, std::llround(opt_.every / instant_)};
    auto it = state_blocks_.find(full);
    if (it != state_blocks_.end()) {
      P.topLeftCorner(r, r) = it->second;
    } else {
      Segment& seg = segment(config_, s_start);
      P.topLeftCorner(r, r) = dense_propagator(seg.sys, opt_.every).topLeftCorner(r, r);
      ++sum_.propagators_built;
      state_blocks_.emplace(full, P.topLeftCorner(r, r));
      cache_bytes_ += 8.0 * static_cast<double>(r * r);
    }
  }
  Eigen::VectorXd v, y;
  for (Eigen::Index j = 0; j < q0; ++j) {
    v = Eigen::VectorXd::Zero(r + q0);
    v(r + j) = 1;
    for (const Step& st : steps) {
      const Segment& seg = segment(config_, st.structure);
      if (st.length > 0) {
        expm_action(seg.sys, st.length, v, y, work1_, work2_);
        v.swap(y);
      }
      if (st.next != st.structure || !st.refreshed.empty()) {
        reseat(v, y, st.structure, st.next, st.refreshed);
        v.swap(y);
      }
    }
    P.col(r + j) = v;
  }
  if (!P.allFinite()) {
    comp.refused = true;
    return;
  }
  comp.P = run_matrix(std::move(P), segment(config_, structure_).sys.scale,
                      segment(config_, s_start).sys.scale);
  if (comp.P.is_sparse) ++sum_.sparse_propagators;
}

void Engine::emit(double t) {
  if (!current_) current_ = &segment(config_, structure_);
  Segment& seg = *current_;
  if (seg.direct.rows() > 0) {
    // Each value is one dot product of a contiguous row with X (a handful of states for the
    // small circuits where this per-sample overhead matters).
    const Eigen::Index cols = seg.direct.cols();
    const double* x = X_.data();
    for (Eigen::Index k = 0; k < seg.direct.rows(); ++k) {
      const double* row = seg.direct.data() + k * cols;
      double acc = 0;
      for (Eigen::Index j = 0; j < cols; ++j) acc += row[j] * x[j];
      values_[static_cast<std::size_t>(k)] = acc;
    }
  } else {
    base_.noalias() = seg.O * X_;
    for (std::size_t s = 0; s < programs_.size(); ++s)
      values_[s] = run_program(programs_[s], base_.data(), stack_.data());
  }
  deliver(t);
}

void Engine::not_finite(double t) const {
  const Configuration& cfg = configs_[static_cast<std::size_t>(config_)];
  std::string msg = "the solution is not finite at t = " + fmt_num(t, "s");
  if (active_) msg += " (the network is unstable and has grown beyond the range of numbers)";
  if (cfg.condition > 0) msg += "; condition estimate of the algebraic part " + fmt_num(cfg.condition, "");
  throw NumericalFailure(msg);
}

void Engine::deliver(double t) {
  for (double v : values_)
    if (!std::isfinite(v)) not_finite(t);
  if (dense_ && sum_.samples % static_cast<std::size_t>(dense_stride_) == 0) keep(t, false);
  sink_(t, values_.data(), values_.size());
  ++sum_.samples;
}

// Full output steps from sample k on while the next event lies beyond the next sample: the
// steady stretch between corners, X <- Phi X and the output map, without advance()'s
// lookups. Needs the propagator of the full step as a matrix (advance() just used it), the
// direct output map, and no dense output (which keeps checkpoints between samples). Returns
// the number of steps taken (0: not applicable).
long Engine::steady_run(long k, long n_samples, double next_event) {
  if (dense_ || !last_entry_ || last_entry_->P.empty() || last_h_ != opt_.every ||
      last_key_.config != config_ || last_key_.structure != structure_)
    return 0;
  if (!current_) current_ = &segment(config_, structure_);
  if (current_->direct.rows() == 0) return 0;
  const RunMatrix& P = last_entry_->P;
  if (!P.is_sparse) {
    switch (P.rows()) {
      case 2: return steady_fixed<2>(k, n_samples, next_event);
      case 3: return steady_fixed<3>(k, n_samples, next_event);
      case 4: return steady_fixed<4>(k, n_samples, next_event);
      case 5: return steady_fixed<5>(k, n_samples, next_event);
      case 6: return steady_fixed<6>(k, n_samples, next_event);
      case 7: return steady_fixed<7>(k, n_samples, next_event);
      case 8: return steady_fixed<8>(k, n_samples, next_event);
      default: break;
    }
  }
  const auto& O = current_->direct;
  Eigen::Map<Eigen::VectorXd> values(values_.data(), static_cast<Eigen::Index>(values_.size()));
  long steps = 0;
  for (long j = k; j < n_samples; ++j) {
    const double tn = static_cast<double>(j + 1) * opt_.every;
    if (tn >= next_event) break;
    P.apply(X_, Y_);
    X_.swap(Y_);
    values.noalias() = O * X_;
    deliver(tn);
    ++steps;
    if (opt_.progress && (j + 1) % progress_every_ == 0)
      opt_.progress(static_cast<double>(j + 1) / static_cast<double>(n_samples));
  }
  return steps;
}

// steady_run for an augmented size N <= kFixedKernelMax: the state, the propagator and the
// output map as fixed-size Eigen objects (no loop bounds or allocation per sample).
template <int N>
long Engine::steady_fixed(long k, long n_samples, double next_event) {
  // Everything the loop reads is local: the sink is opaque to the compiler, so members would
  // be reloaded after every call.
  const Eigen::Matrix<double, N, N> P = last_entry_->P.dense;
  const auto& direct = current_->direct;
  const Eigen::Index nv = direct.rows();
  const Eigen::Matrix<double, Eigen::Dynamic, N, Eigen::RowMajor> O = direct;
  double* const values = values_.data();
  const std::size_t count = values_.size();
  const SampleSink& sink = sink_;
  Eigen::Matrix<double, N, 1> x = X_, y;
  const bool progress = static_cast<bool>(opt_.progress);
  const long progress_every = progress_every_;
  long until_progress = (progress_every - (k + 1) % progress_every) % progress_every + 1;
  const double every = opt_.every;
  long j = k;
  for (; j < n_samples; ++j) {
    const double tn = static_cast<double>(j + 1) * every;
    if (tn >= next_event) break;
    y.noalias() = P * x;
    x = y;
    // Each value a fixed-size dot product; 0 * v summed is 0 when every value is finite
    // and NaN otherwise (one test per sample instead of one per value).
    double nan_probe = 0;
    for (Eigen::Index v = 0; v < nv; ++v) {
      const double value = O.row(v).dot(x);
      values[v] = value;
      nan_probe += 0.0 * value;
    }
    if (nan_probe != 0.0) {  // true for NaN
      X_ = x;
      sum_.samples += static_cast<std::size_t>(j - k);
      not_finite(tn);
    }
    sink(tn, values, count);
    if (progress && --until_progress == 0) {
      until_progress = progress_every;
      opt_.progress(static_cast<double>(j + 1) / static_cast<double>(n_samples));
    }
  }
  sum_.samples += static_cast<std::size_t>(j - k);
  X_ = x;
  return j - k;
}

TransientSummary Engine::run() {
  const auto start = std::chrono::steady_clock::now();
  auto finish = [&]() {
    sum_.seconds =
        std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
    return sum_;
  };
  if (!(opt_.until > 0) || !(opt_.every > 0) || !std::isfinite(opt_.until) ||
      !std::isfinite(opt_.every)) {
    diags_.push_back(make_diagnostic(Severity::Error, run_where(),
                          "the transient needs until > 0 and every > 0 (got until=" +
                              fmt_num(opt_.until, "s") + ", every=" + fmt_num(opt_.every, "s") + ")"));
    sum_.status = Status::BadInput;
    return finish();
  }
  if (!check_inputs()) {
    sum_.status = Status::BadInput;
    return finish();
  }
  if (opt_.structure) {
    net_ = opt_.structure.get();
  } else {
    own_net_ = mna::Network::analyse(c_, opt_.strict, diags_);
    if (own_net_) net_ = &*own_net_;
  }
  if (!net_) {
    sum_.status = Status::BadInput;
    return finish();
  }
  // Signals: the streamed ones, and with dense output the trajectory's extra ones.
  const auto compile_all = [&](const std::vector<Signal>& signals, std::vector<std::vector<Instr>>& programs) {
    for (const Signal& s : signals) {
      std::vector<Instr> code;
      std::string error;
      if (!compiler_.compile(s.expr, code, error)) {
        diags_.push_back(make_diagnostic(
            Severity::Error, s.where,
            "cannot evaluate signal " + s.name + (error.empty() ? "" : ": " + error)));
        return false;
      }
      programs.push_back(std::move(code));
    }
    return true;
  };
  if (!compile_all(signals_, programs_) ||
      (opt_.dense_output && !compile_all(opt_.trajectory_signals, extra_programs_))) {
    sum_.status = Status::BadInput;
    return finish();
  }
  std::size_t depth = 1;
  for (const auto& p : programs_) depth = std::max(depth, p.size());
  stack_.assign(depth, 0.0);
  values_.assign(programs_.size(), 0.0);
  {
    bool all_loads = !programs_.empty();
    for (const auto& p : programs_)
      all_loads = all_loads && p.size() == 1 && p[0].kind == Instr::Load;
    if (all_loads)
      for (const auto& p : programs_) direct_rows_.push_back(p[0].base);
  }
  base_.resize(static_cast<Eigen::Index>(compiler_.bases.size()));

  // Sample grid (NETLIST.md section 7).
  const double ratio = opt_.until / opt_.every;
  const double whole = std::round(ratio);
  long n_samples;
  if (std::abs(ratio - whole) <= kWholeSlack * ratio) {
    n_samples = static_cast<long>(whole);
  } else {
    n_samples = static_cast<long>(std::floor(ratio));
    diags_.push_back(make_diagnostic(Severity::Warning, run_where(),
                          "until/every = " + std::to_string(ratio) +
                              " is not a whole number: the last sample is at " +
                              fmt_num(static_cast<double>(n_samples) * opt_.every, "s")));
  }
  const double t_end = static_cast<double>(n_samples) * opt_.every;
  time_scale_ = opt_.every;
  instant_ = kInstantUlps * std::numeric_limits<double>::epsilon() * std::max(t_end, opt_.every);

  try {
    if (!build_structure(t_end)) return finish();
    if (!initial_state()) return finish();
    sum_.states = static_cast<std::size_t>(configs_[static_cast<std::size_t>(config_)].ss.A.rows());
    check_stability(config_);
    // A gate that differs at 0 from before 0 switches at t = 0.
    Event at_zero;
    for (std::size_t k = 0; k < gates_.size(); ++k) {
      const bool now = gates_[k]->value(0.0) > 0.5;
      if (now != closed_[k]) at_zero.switches.emplace_back(static_cast<int>(k), now ? 1 : -1);
    }
    if (!at_zero.switches.empty()) {
      handle(at_zero);
      --sum_.segments;
    }
    const std::vector<Event> events = build_events(t_end);
    if (opt_.dense_output) {
      dense_ = std::make_unique<DenseRecorder>();
      dense_stride_ = dense_stride(n_samples, static_cast<long>(events.size()),
                                   static_cast<long>(X_.size()), dense_budget_bytes());
    }
    std::size_t e = 0;
    while (e < events.size() && events[e].t == 0) {
      handle(events[e++]);
      --sum_.segments;
    }
    sum_.segments = 1;
    emit(0.0);
    const long progress_every = std::max(1L, n_samples / kProgressCalls);
    progress_every_ = progress_every;
    double t = 0;
    for (long k = 0; k < n_samples;) {
      const double tn = static_cast<double>(k + 1) * opt_.every;
      const bool at_sample = t == static_cast<double>(k) * opt_.every;
      if (at_sample && e < events.size() && events[e].t < tn) {
        std::size_t e2 = e;
        bool switching = false;
        for (; e2 < events.size() && events[e2].t < tn; ++e2)
          switching = switching || !events[e2].switches.empty();
        if (!switching) {
          interval_with_corners(t, tn, e, e2, events);
          e = e2;
          t = tn;
          ++k;
          while (e < events.size() && events[e].t == tn) handle(events[e++]);
          emit(t);
          if (opt_.progress && k % progress_every == 0)
            opt_.progress(static_cast<double>(k) / static_cast<double>(n_samples));
          continue;
        }
      }
      if (e < events.size() && events[e].t < tn) {
        advance(events[e].t - t);
        t = events[e].t;
        handle(events[e++]);
        continue;
      }
      advance(at_sample ? opt_.every : tn - t, at_sample ? n_samples - k : 1);
      t = tn;
      ++k;
      while (e < events.size() && events[e].t == tn) handle(events[e++]);
      emit(t);
      if (opt_.progress && k % progress_every == 0)
        opt_.progress(static_cast<double>(k) / static_cast<double>(n_samples));
      if (at_sample) {
        const long steps = steady_run(
            k, n_samples,
            e < events.size() ? events[e].t : std::numeric_limits<double>::infinity());
        if (steps > 0) {
          k += steps;
          t = static_cast<double>(k) * opt_.every;
        }
      }
    }
    modal_checks();
    if (dense_) {
      DenseParts parts;
      parts.end = t_end;
      parts.every = opt_.every;
      parts.instant = instant_;
      parts.samples = n_samples;
      for (const auto& key : dense_keys_) {
        Segment& seg = segments_.at(key);
        parts.segments.push_back({std::move(seg.sys), std::move(seg.O)});
      }
      segments_.clear();
      parts.checkpoints = std::move(*dense_);
      dense_.reset();
      parts.programs = programs_;
      parts.programs.insert(parts.programs.end(), extra_programs_.begin(), extra_programs_.end());
      parts.bases = compiler_.bases.size();
      parts.bracket_step = bracket_step_;
      sum_.trajectory = make_dense_trajectory(std::move(parts));
    }
  } catch (const NumericalFailure& ex) {
    if (std::string(ex.what()).empty()) {
      if (sum_.status == Status::Ok) sum_.status = Status::BadInput;
    } else {
      diags_.push_back(make_diagnostic(Severity::Error, run_where(), ex.what(),
                            "check for a negative resistance or an extreme element value"));
      sum_.status = Status::Numerical;
    }
  }
  return finish();
}

}  // namespace

TransientSummary run_transient(const Circuit& circuit, const std::vector<Signal>& signals,
                               const TransientOptions& options, const SampleSink& sink,
                               Diagnostics& diagnostics) {
  Engine engine(circuit, signals, options, sink, diagnostics);
  return engine.run();
}

SampledRun run_transient_sampled(const Circuit& circuit, const std::vector<Signal>& signals,
                                 const TransientOptions& options, Diagnostics& diagnostics) {
  SampledRun out;
  out.values.resize(signals.size());
  // Reserve the rows up front (N + 1, NETLIST.md section 7, with the same slack as the
  // engine): growing by reallocation cost about a third of a 1e6-sample run (page faults
  // and copies). Capped so an absurd request fails in the engine, not here.
  constexpr double kReserveCap = 1e8;
  if (options.every > 0 && options.until > 0) {
    const double ratio = options.until / options.every;
    const double rows = std::floor(ratio * (1 + kWholeSlack)) + 1;
    if (std::isfinite(rows) && rows <= kReserveCap) {
      out.time.reserve(static_cast<std::size_t>(rows));
      for (auto& v : out.values) v.reserve(static_cast<std::size_t>(rows));
    }
  }
  const SampleSink sink = [&out](double t, const double* v, std::size_t n) {
    out.time.push_back(t);
    for (std::size_t i = 0; i < n; ++i) out.values[i].push_back(v[i]);
  };
  out.summary = run_transient(circuit, signals, options, sink, diagnostics);
  return out;
}

}  // namespace ringdown::solver
