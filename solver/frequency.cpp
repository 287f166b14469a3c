// Frequency analysis: see frequency.hpp. The order of work: analyse and stamp
// the network once (initial switch states), compile every signal to one row
// of (Lx, Ldx, Lu), then one complex solve per point; the figures refine on
// the exact response (FrequencyResponse::at), never on the sample grid alone
// (NETLIST.md section 7, "Figures": computed on the exact solution).
#include "solver/frequency.hpp"

#include "solver/golden_section.hpp"

#include <algorithm>
#include <cmath>
#include <limits>
#include <utility>

#include "parser/units.hpp"
#include "solver/state_space.hpp"  // equilibrate

namespace ringdown::solver {

namespace {

constexpr double kPi = 3.14159265358979323846;
// A pencil whose reciprocal condition estimate (after equilibration) is
// below this is singular to working precision: a few ulps of 1 (IEEE 754
// binary64 epsilon 2.2e-16; common practice, no source).
constexpr double kSingularRcond = 1e-15;
// Tolerance on k when deciding whether the last point lies on `to`
// (frequency.hpp).
constexpr double kLastPointSlack = 1e-9;
// Refinement of the corner and the peak stops when the bracket in log10 f
// is this narrow: 1e-12 decades is a relative 2.3e-12 in f, far below the
// 12 significant digits the CSV prints (common practice, no source).
constexpr double kLogBracket = 1e-12;
// Iteration caps (a bracket of one decade needs about 40 bisections or 58
// golden steps to reach kLogBracket).
constexpr int kMaxBisections = 200;
constexpr int kMaxGoldenSteps = 200;


double to_db(std::complex<double> h) {
  const double m = std::abs(h);
  return m > 0 ? 20.0 * std::log10(m) : -std::numeric_limits<double>::infinity();
}

double to_deg(std::complex<double> h) {
  double d = std::arg(h) * (180.0 / kPi);
  if (d <= -180.0) d += 360.0;  // arg gives -pi for (-1, -0): NETLIST wants (-180, 180]
  return d;
}

// --- Dense pencil solver -------------------------------------------------------

class DensePencilSolver final : public PencilSolver {
 public:
  explicit DensePencilSolver(const mna::Descriptor& d) : C_(d.C), G_(d.G) {}
  bool solve(double omega, const Eigen::VectorXd& b, Eigen::VectorXcd& x) const override {
    const Eigen::Index n = G_.rows();
    if (n == 0) {
      x.resize(0);
      return true;
    }
    Eigen::MatrixXcd M = G_.cast<std::complex<double>>();
    if (omega != 0) M += std::complex<double>(0, omega) * C_.cast<std::complex<double>>();
    Eigen::VectorXd r, c;
    equilibrate(Eigen::MatrixXd(M.cwiseAbs()), r, c);
    const Eigen::MatrixXcd S = r.asDiagonal() * M * c.asDiagonal();
    const Eigen::PartialPivLU<Eigen::MatrixXcd> lu(S);
    if (!(lu.rcond() >= kSingularRcond)) return false;
    const Eigen::VectorXcd rb = (r.array() * b.array()).matrix().cast<std::complex<double>>();
    x = c.cast<std::complex<double>>().asDiagonal() * lu.solve(rb);
    return x.allFinite();
  }

 private:
  Eigen::MatrixXd C_, G_;
};

// --- Signals as linear maps ------------------------------------------------------

// The small-signal part of an expression: a constant (no dependence on the
// unknowns) or a linear form x.X + dx.X' + u.(input).
struct Linear {
  bool constant = true;
  double value = 0;  // when constant
  Eigen::RowVectorXd x, dx;
  double u = 0;
};

class SignalCompiler {
 public:
  SignalCompiler(const Circuit& c, const mna::Network& net, const mna::SwitchState& closed,
                 int input_column)
      : c_(c), net_(net), closed_(closed), column_(input_column),
        n_(net.unknowns()) {}

  // Empty with `error` set when the expression is not linear.
  std::optional<Linear> compile(const SignalExpr& e, std::string& error) const {
    using Op = SignalExpr::Op;
    switch (e.op) {
      case Op::NodeVoltage: return from_map(net_.node_voltage(e.index));
      case Op::ElementCurrent: return from_map(net_.element_current(c_, e.index, closed_));
      case Op::PartQuantity:
        switch (e.quantity) {
          case Quantity::Voltage: return from_map(net_.part_voltage(c_, e.index));
          case Quantity::Current: return from_map(net_.part_current(c_, e.index, closed_));
          case Quantity::CapacitanceVoltage: return from_map(net_.capacitance_voltage(c_, e.index));
          case Quantity::InductanceCurrent: return from_map(net_.inductance_current(c_, e.index));
          case Quantity::Power:
            error = c_.parts[static_cast<std::size_t>(e.index)].name +
                    ".p is a power (v times i), which has no small-signal linear response";
            return std::nullopt;
        }
        break;
      case Op::Constant: {
        Linear k;
        k.value = e.constant;
        return k;
      }
      case Op::Neg: {
        if (e.args.size() != 1) break;
        auto a = compile(e.args[0], error);
        if (!a) return std::nullopt;
        return scaled(*a, -1.0);
      }
      case Op::Add: case Op::Sub: case Op::Mul: case Op::Div: case Op::Pow: {
        if (e.args.size() != 2) break;
        auto a = compile(e.args[0], error);
        if (!a) return std::nullopt;
        auto b = compile(e.args[1], error);
        if (!b) return std::nullopt;
        return combine(e.op, *a, *b, error);
      }
    }
    error = "malformed signal expression";
    return std::nullopt;
  }

 private:
  Linear from_map(const mna::LinearMap& m) const {
    Linear l;
    l.constant = false;
    l.x = m.x_row.size() == n_ ? m.x_row : Eigen::RowVectorXd::Zero(n_);
    l.dx = m.dx_row.size() == n_ ? m.dx_row : Eigen::RowVectorXd::Zero(n_);
    l.u = column_ < m.u_row.size() ? m.u_row(column_) : 0.0;
    return l;
  }
  static Linear scaled(Linear a, double k) {
    if (a.constant) {
      a.value *= k;
    } else {
      a.x *= k;
      a.dx *= k;
      a.u *= k;
    }
    return a;
  }
  Linear zero() const {
    Linear l;
    l.constant = false;
    l.x = Eigen::RowVectorXd::Zero(n_);
    l.dx = Eigen::RowVectorXd::Zero(n_);
    return l;
  }
  std::optional<Linear> combine(SignalExpr::Op op, const Linear& a, const Linear& b,
                                std::string& error) const {
    using Op = SignalExpr::Op;
    if (a.constant && b.constant) {
      Linear k;
      switch (op) {
        case Op::Add: k.value = a.value + b.value; break;
        case Op::Sub: k.value = a.value - b.value; break;
        case Op::Mul: k.value = a.value * b.value; break;
        case Op::Div: k.value = a.value / b.value; break;
        default: k.value = std::pow(a.value, b.value); break;
      }
      return k;
    }
    switch (op) {
      case Op::Add: case Op::Sub: {
        // A constant term is an offset: its small-signal part is zero.
        const double sign = op == Op::Add ? 1.0 : -1.0;
        Linear out = a.constant ? zero() : a;
        if (!b.constant) {
          out.x += sign * b.x;
          out.dx += sign * b.dx;
          out.u += sign * b.u;
        }
        return out;
      }
      case Op::Mul:
        if (a.constant) return scaled(b, a.value);
        if (b.constant) return scaled(a, b.value);
        error = "a product of two signals is not small-signal linear";
        return std::nullopt;
      case Op::Div:
        if (b.constant && b.value != 0) return scaled(a, 1.0 / b.value);
        error = b.constant ? "division by zero" : "division by a signal is not small-signal linear";
        return std::nullopt;
      default:
        if (!a.constant && b.constant && b.value == 1.0) return a;
        error = "a power of a signal is not small-signal linear";
        return std::nullopt;
    }
  }

  const Circuit& c_;
  const mna::Network& net_;
  const mna::SwitchState& closed_;
  Eigen::Index column_;
  Eigen::Index n_;
};

// Bisection in log10 f on g(f) = dB(f) - level, bracket [lo, hi] with
// g(lo) > 0 >= g(hi); `guess` (inside) is tried first.
double bisect_corner(const FrequencyResponse& r, std::size_t k, double level, double lo,
                     double hi, double guess) {
  std::vector<std::complex<double>> h;
  double a = std::log10(lo), b = std::log10(hi);
  double mid = std::log10(guess);
  if (!(mid > a && mid < b)) mid = 0.5 * (a + b);
  for (int i = 0; i < kMaxBisections && b - a > kLogBracket; ++i) {
    if (!r.at(std::pow(10.0, mid), h)) break;  // singular inside: keep what we have
    if (to_db(h[k]) > level) a = mid; else b = mid;
    mid = 0.5 * (a + b);
  }
  return std::pow(10.0, 0.5 * (a + b));
}

// Golden-section search for the largest dB of signal k in [lo, hi] (log f).
std::pair<double, double> golden_peak(const FrequencyResponse& r, std::size_t k, double lo,
                                      double hi) {
  std::vector<std::complex<double>> h;
  auto gain = [&](double lf) {
    return r.at(std::pow(10.0, lf), h) ? to_db(h[k]) : -std::numeric_limits<double>::infinity();
  };
  const GoldenSectionResult bracket =
      golden_section_max(gain, std::log10(lo), std::log10(hi), kLogBracket, kMaxGoldenSteps);
  const double lf = 0.5 * (bracket.lo + bracket.hi);
  return {std::pow(10.0, lf), gain(lf)};
}

SourcePosition position_of(const Circuit& circuit) {
  if (circuit.frequency) return circuit.frequency->where;
  SourcePosition p;
  p.file = circuit.file;
  return p;
}

}  // namespace

std::vector<double> frequency_points(double from, double to, int per_decade) {
  std::vector<double> out;
  if (!(from > 0) || !(to >= from) || per_decade < 1 || !std::isfinite(to)) return out;
  const double last = std::floor(per_decade * std::log10(to / from) + kLastPointSlack);
  for (long k = 0; k <= static_cast<long>(last); ++k)
    out.push_back(from * std::pow(10.0, static_cast<double>(k) / per_decade));
  return out;
}

std::unique_ptr<PencilSolver> make_dense_pencil_solver(const mna::Descriptor& descriptor) {
  return std::make_unique<DensePencilSolver>(descriptor);
}

void unwrap_degrees(std::vector<double>& deg) {
  if (deg.empty()) return;
  // First point into (-180, 180].
  deg[0] = std::fmod(deg[0], 360.0);
  if (deg[0] > 180.0) deg[0] -= 360.0;
  if (deg[0] <= -180.0) deg[0] += 360.0;
  for (std::size_t i = 1; i < deg.size(); ++i) {
    const double turns = std::round((deg[i] - deg[i - 1]) / 360.0);
    deg[i] -= 360.0 * turns;
  }
}

std::optional<FrequencyResponse> FrequencyResponse::build(const Circuit& circuit,
                                                          const std::vector<Signal>& signals,
                                                          int input_part, bool strict,
                                                          Diagnostics& diagnostics) {
  const SourcePosition where = position_of(circuit);
  if (input_part < 0 || input_part >= static_cast<int>(circuit.parts.size()) ||
      (circuit.parts[static_cast<std::size_t>(input_part)].kind != ElementKind::VoltageSource &&
       circuit.parts[static_cast<std::size_t>(input_part)].kind != ElementKind::CurrentSource)) {
    diagnostics.push_back(make_diagnostic(Severity::Error, where,
                               "frequency: the input must be a voltage or current source",
                               "name one with input= or --input"));
    return std::nullopt;
  }
  std::optional<mna::Network> net = mna::Network::analyse(circuit, strict, diagnostics);
  if (!net) return std::nullopt;
  const int main = circuit.parts[static_cast<std::size_t>(input_part)].main;
  const auto& inputs = net->input_elements();
  const auto it = std::find(inputs.begin(), inputs.end(), main);
  if (it == inputs.end()) {
    diagnostics.push_back(make_diagnostic(Severity::Error, where,
                               "frequency: " + circuit.parts[static_cast<std::size_t>(input_part)].name +
                                   " is not an input of the network"));
    return std::nullopt;
  }
  const int column = static_cast<int>(it - inputs.begin());
  const mna::SwitchState closed = net->initial_switches();
  const mna::Descriptor d = net->stamp(circuit, closed);

  FrequencyResponse r;
  const auto n = static_cast<Eigen::Index>(net->unknowns());
  const auto s = static_cast<Eigen::Index>(signals.size());
  r.b_ = n > 0 ? Eigen::VectorXd(d.B.col(column)) : Eigen::VectorXd();
  r.Lx_ = Eigen::MatrixXd::Zero(s, n);
  r.Ldx_ = Eigen::MatrixXd::Zero(s, n);
  r.Lu_ = Eigen::VectorXd::Zero(s);
  const SignalCompiler compiler(circuit, *net, closed, column);
  bool ok = true;
  for (Eigen::Index k = 0; k < s; ++k) {
    const Signal& sig = signals[static_cast<std::size_t>(k)];
    std::string error;
    const std::optional<Linear> lin = compiler.compile(sig.expr, error);
    if (!lin) {
      diagnostics.push_back(make_diagnostic(Severity::Error, sig.where.line > 0 ? sig.where : where,
                                 "frequency: cannot record '" + sig.name + "': " + error,
                                 "record voltages and currents (X.v, X.i) for a frequency response; "
                                 "powers belong to the transient analysis"));
      ok = false;
      continue;
    }
    if (lin->constant) continue;  // an offset alone: zero response
    r.Lx_.row(k) = lin->x;
    r.Ldx_.row(k) = lin->dx;
    r.Lu_(k) = lin->u;
  }
  if (!ok) return std::nullopt;
  r.solver_ = make_dense_pencil_solver(d);
  return r;
}

bool FrequencyResponse::at(double hz, std::vector<std::complex<double>>& h) const {
  const double omega = 2.0 * kPi * hz;
  Eigen::VectorXcd x;
  if (!solver_->solve(omega, b_, x)) return false;
  h.resize(signals());
  if (x.size() == 0) {
    for (std::size_t k = 0; k < h.size(); ++k) h[k] = Lu_(static_cast<Eigen::Index>(k));
    return true;
  }
  const std::complex<double> jw(0, omega);
  const Eigen::VectorXcd y = Lx_.cast<std::complex<double>>() * x +
                             jw * (Ldx_.cast<std::complex<double>>() * x) +
                             Lu_.cast<std::complex<double>>();
  for (std::size_t k = 0; k < h.size(); ++k) h[k] = y(static_cast<Eigen::Index>(k));
  return true;
}

FrequencyResult run_frequency(const Circuit& circuit, const std::vector<Signal>& signals,
                              const FrequencyOptions& o, Diagnostics& diagnostics) {
  FrequencyResult result;
  const SourcePosition where = position_of(circuit);
  if (!(o.from > 0) || !(o.to > o.from) || !std::isfinite(o.to) || o.per_decade < 1) {
    diagnostics.push_back(make_diagnostic(Severity::Error, where,
                               "frequency: needs 0 < from < to and per_decade >= 1 (from = " +
                                   format_si(o.from, "Hz") + ", to = " + format_si(o.to, "Hz") + ")"));
    result.status = Status::BadInput;
    return result;
  }
  std::optional<FrequencyResponse> response =
      FrequencyResponse::build(circuit, signals, o.input_part, o.strict, diagnostics);
  if (!response) {
    result.status = Status::BadInput;
    return result;
  }
  result.freq = frequency_points(o.from, o.to, o.per_decade);
  const std::size_t ns = signals.size(), np = result.freq.size();
  result.signals.resize(ns);
  for (std::size_t k = 0; k < ns; ++k) {
    result.signals[k].name = signals[k].name;
    result.signals[k].db.resize(np);
    result.signals[k].deg.resize(np);
  }
  std::vector<std::complex<double>> h;
  for (std::size_t i = 0; i < np; ++i) {
    if (!response->at(result.freq[i], h)) {
      diagnostics.push_back(make_diagnostic(
          Severity::Error, where,
          "frequency: the network is singular at " + format_si(result.freq[i], "Hz", 8) +
              " (a lossless resonance exactly on a sweep point, or a part without a path)",
          "add a little loss (esr=, dcr=) or move the sweep points (from=, per_decade=)"));
      result.status = Status::Numerical;
      return result;
    }
    for (std::size_t k = 0; k < ns; ++k) {
      result.signals[k].db[i] = to_db(h[k]);
      result.signals[k].deg[i] = to_deg(h[k]);
    }
  }
  for (auto& s : result.signals) unwrap_degrees(s.deg);

  // --- Figures ---------------------------------------------------------------------
  std::vector<std::complex<double>> dc;
  const bool dc_solved = response->at(0.0, dc);
  for (std::size_t k = 0; k < ns && np > 0; ++k) {
    SignalResponse& s = result.signals[k];
    FrequencyFigures& f = s.figures;
    f.dc_at_lowest = !dc_solved;
    f.dc_gain_db = dc_solved ? to_db(dc[k]) : s.db[0];
    if (std::isfinite(f.dc_gain_db)) {
      const double level = f.dc_gain_db - kHalfPowerDb;
      for (std::size_t i = 1; i < np; ++i) {
        if (s.db[i - 1] > level && !(s.db[i] > level)) {
          // Linear in log f between the two samples, then exact bisection.
          const double l0 = std::log10(result.freq[i - 1]), l1 = std::log10(result.freq[i]);
          double guess = result.freq[i];
          if (std::isfinite(s.db[i]))
            guess = std::pow(10.0, l0 + (l1 - l0) * (s.db[i - 1] - level) / (s.db[i - 1] - s.db[i]));
          f.corner_hz = bisect_corner(*response, k, level, result.freq[i - 1], result.freq[i], guess);
          break;
        }
      }
    }
    const auto top = static_cast<std::size_t>(std::max_element(s.db.begin(), s.db.end()) - s.db.begin());
    f.peak_db = s.db[top];
    f.peak_hz = result.freq[top];
    if (np > 1) {
      const std::size_t lo = top > 0 ? top - 1 : 0, hi = std::min(np - 1, top + 1);
      const auto [hz, db] = golden_peak(*response, k, result.freq[lo], result.freq[hi]);
      if (db > f.peak_db) {
        f.peak_db = db;
        f.peak_hz = hz;
      }
    }
    if (o.phase_at) {
      std::vector<std::complex<double>> hp;
      if (response->at(*o.phase_at, hp)) {
        // The branch nearest the unwrapped sweep phase at the nearest point
        // (in log f), so the figure agrees with the CSV column.
        const double lf = std::log10(*o.phase_at);
        std::size_t near = 0;
        for (std::size_t i = 1; i < np; ++i)
          if (std::fabs(std::log10(result.freq[i]) - lf) < std::fabs(std::log10(result.freq[near]) - lf))
            near = i;
        double p = to_deg(hp[k]);
        p -= 360.0 * std::round((p - s.deg[near]) / 360.0);
        f.phase_at_deg = p;
      }
    }
  }
  return result;
}

}  // namespace ringdown::solver
