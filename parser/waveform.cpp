// The waveforms of NETLIST.md section 5 as exact exponential-polynomial
// pieces between corners (waveform.hpp explains the representation).
//
// Every exact leaf (constant, step, pulse, sine, approach, points, samples)
// implements one function, `locate(t, from_left)`: the formula of the piece
// that holds at t, expanded in tau = t' - t. value(), piece() and the left
// limit at 0 all come from it, so they agree to rounding by construction.
// Corners are computed arithmetically from the parameters (pulse k starts at
// start + k*period exactly, never by accumulating periods), so a long train
// neither drifts nor costs more than its output.
//
// Not here: `formula` fitting (the solver fits it), unit checking (the
// parser), argument validation (the parser; the factories only guard against
// values that would make the arithmetic meaningless).
#include "parser/waveform.hpp"

#include <algorithm>
#include <cmath>
#include <limits>
#include <numbers>
#include <stdexcept>

#include "parser/units.hpp"

namespace ringdown {

namespace {

constexpr double kInf = std::numeric_limits<double>::infinity();
constexpr double kPi = std::numbers::pi;

// Relative slack under which an offset inside a pulse period counts as the
// period's end (rise + width + fall == period written in decimal rarely sums
// exactly); a few ulps of the period (common practice, no source).
constexpr double kPeriodSlack = 1e-12;

// Crossing search (default Waveform::crossings): samples per oscillation
// period of the fastest term, and the minimum per piece. A sum of k
// exponentials/cosines has few sign changes per period of its fastest
// oscillation (Polya & Szego's bound on zeros of exponential sums, from
// memory); 16 samples per period brackets each one separately in practice.
constexpr double kSamplesPerPeriod = 16.0;
constexpr int kMinSamplesPerPiece = 32;
// Guard: never more than this many samples for one piece (a 1 MHz sine over
// 1 s needs 1.6e7; beyond this the search would stall the program).
constexpr double kMaxSamplesPerPiece = 2e8;
// A non-exact waveform (formula) has no known frequency content: sample
// value() this many times over (0, t_end].
constexpr int kFormulaCrossingSamples = 100000;

std::string num(double x) { return format_si(x, ""); }
std::string sec(double x) { return format_si(x, "s"); }

// Term helpers.
ExpPolyTerm constant_term(double c) { return ExpPolyTerm{c, 0, 0, 0, 0}; }
ExpPolyTerm ramp_term(double slope) { return ExpPolyTerm{slope, 1, 0, 0, 0}; }

// Value of one term at tau.
double term_value(const ExpPolyTerm& term, double tau) {
  double x = term.coef;
  for (int k = 0; k < term.power; ++k) x *= tau;
  if (term.rate != 0) x *= std::exp(term.rate * tau);
  if (term.omega != 0 || term.phase != 0) x *= std::cos(term.omega * tau + term.phase);
  return x;
}

double sum_terms(const std::vector<ExpPolyTerm>& terms, double tau) {
  double sum = 0;
  for (const auto& term : terms) sum += term_value(term, tau);
  return sum;
}

// 2*pi*frac(x): an angle of x whole turns reduced to [0, 2 pi), keeping the
// precision that omega*t loses when t spans many periods.
double turns_to_angle(double turns) { return 2 * kPi * (turns - std::floor(turns)); }

// The formula valid at t: terms in tau = t' - t, and the next corner after t
// (the end of this formula's validity; +inf if none).
struct Located {
  std::vector<ExpPolyTerm> terms;
  double end = kInf;
};

// Base of the exact leaves: everything derives from locate().
class ExactLeaf : public Waveform {
 public:
  double value(double t) const override {
    if (t < 0) return sum_terms(locate(0.0, true).terms, 0.0);
    return sum_terms(locate(t, false).terms, 0.0);
  }
  WaveformPiece piece(double t_begin) const override {
    Located at = locate(t_begin, false);
    return WaveformPiece{t_begin, at.end, std::move(at.terms)};
  }

 protected:
  // from_left: the formula that holds just before t (for the left limit);
  // otherwise the one that holds from t on (right-continuous).
  virtual Located locate(double t, bool from_left) const = 0;
};

// Keeps corners in (0, t_end].
void add_corner(std::vector<double>& out, double c, double t_end) {
  if (c > 0 && c <= t_end) out.push_back(c);
}

void sort_unique(std::vector<double>& v) {
  std::sort(v.begin(), v.end());
  v.erase(std::unique(v.begin(), v.end()), v.end());
}

// --- constant ---------------------------------------------------------------

class ConstantWaveform final : public ExactLeaf {
 public:
  explicit ConstantWaveform(double value) : value_(value) {}
  std::vector<double> corners(double) const override { return {}; }
  std::string describe() const override { return num(value_); }

 protected:
  Located locate(double, bool) const override { return {{constant_term(value_)}, kInf}; }

 private:
  double value_;
};

// --- step -------------------------------------------------------------------

class StepWaveform final : public ExactLeaf {
 public:
  StepWaveform(double from, double to, double at, double rise)
      : from_(from), to_(to), at_(at), rise_(std::max(rise, 0.0)) {}

  std::vector<double> corners(double t_end) const override {
    std::vector<double> out;
    add_corner(out, at_, t_end);
    if (rise_ > 0) add_corner(out, at_ + rise_, t_end);
    return out;
  }
  std::string describe() const override {
    return "step(from=" + num(from_) + ", to=" + num(to_) + ", at=" + sec(at_) +
           ", rise=" + sec(rise_) + ")";
  }

 protected:
  Located locate(double t, bool from_left) const override {
    const double ramp_end = at_ + rise_;
    // Before the step: t < at (from the left: t <= at).
    if (from_left ? t <= at_ : t < at_) return {{constant_term(from_)}, at_};
    if (rise_ > 0 && (from_left ? t <= ramp_end : t < ramp_end)) {
      const double slope = (to_ - from_) / rise_;
      return {{constant_term(from_ + slope * (t - at_)), ramp_term(slope)}, ramp_end};
    }
    return {{constant_term(to_)}, kInf};
  }

 private:
  double from_, to_, at_, rise_;
};

// --- pulse ------------------------------------------------------------------

class PulseWaveform final : public ExactLeaf {
 public:
  explicit PulseWaveform(const PulseSpec& spec) : s_(spec) {
    if (!(s_.period > 0) || !std::isfinite(s_.period)) {
      throw std::invalid_argument("pulse: period must be positive and finite");
    }
    s_.rise = std::max(s_.rise, 0.0);
    s_.fall = std::max(s_.fall, 0.0);
    s_.width = std::max(s_.width, 0.0);
    s_.count = std::max(s_.count, 0L);
    // Offsets within a period where the formula changes: start of the rise,
    // of the high part, of the fall, of the low rest; equal ones merge (a
    // zero rise is a jump at offset 0), and one at the period's end belongs
    // to the next period.
    const double candidates[] = {0.0, s_.rise, s_.rise + s_.width, s_.rise + s_.width + s_.fall};
    for (double o : candidates) {
      if (o >= s_.period * (1 - kPeriodSlack)) continue;
      if (!offsets_.empty() && o <= offsets_.back()) continue;
      offsets_.push_back(o);
    }
    // After the last pulse: is the last segment of a period already `low`?
    last_is_low_ = kind(offsets_.back()) == Segment::Low;
  }

  std::vector<double> corners(double t_end) const override {
    std::vector<double> out;
    if (s_.low == s_.high || !(t_end > 0)) return out;
    // Pulses that can start at or before t_end; computed, not accumulated.
    const double first_k = std::max(0.0, std::floor(-s_.start / s_.period) - 1);
    double last_k = std::floor((t_end - s_.start) / s_.period);
    if (s_.count > 0) last_k = std::min(last_k, static_cast<double>(s_.count - 1));
    if (last_k < first_k) return out;
    const double n = (last_k - first_k + 1) * static_cast<double>(offsets_.size() + 1);
    if (n < 1e9) out.reserve(static_cast<std::size_t>(n));
    for (double k = first_k; k <= last_k; k += 1) {
      const double base = s_.start + k * s_.period;
      for (double o : offsets_) add_corner(out, base + o, t_end);
    }
    // The train's end: the last pulse ends at start + count*period unless its
    // low rest already began (then nothing changes there).
    if (s_.count > 0 && !last_is_low_) {
      add_corner(out, s_.start + static_cast<double>(s_.count) * s_.period, t_end);
    }
    sort_unique(out);  // already sorted except in degenerate rounding cases
    return out;
  }

  std::string describe() const override {
    std::string out = "pulse(low=" + num(s_.low) + ", high=" + num(s_.high) +
                      ", period=" + sec(s_.period) + ", width=" + sec(s_.width) +
                      ", rise=" + sec(s_.rise) + ", fall=" + sec(s_.fall) +
                      ", start=" + sec(s_.start);
    if (s_.count > 0) out += ", count=" + std::to_string(s_.count);
    return out + ")";
  }

 protected:
  Located locate(double t, bool from_left) const override {
    if (s_.low == s_.high) return {{constant_term(s_.low)}, kInf};
    const auto before = [&](double corner) { return from_left ? t <= corner : t < corner; };
    if (before(s_.start)) return {{constant_term(s_.low)}, s_.start};
    // The last corner at or before t (strictly before, from the left): the
    // candidate pulse index from division, checked against the exact corner
    // values on either side so that rounding can never misplace t.
    const double count = s_.count > 0 ? static_cast<double>(s_.count) : kInf;
    const double k0 = std::floor((t - s_.start) / s_.period);
    const double k_high = std::min(k0 + 1, count - 1);
    double k = k_high;
    int j = -1;
    for (; k >= 0 && k >= k_high - 3; k -= 1) {
      for (int jj = static_cast<int>(offsets_.size()) - 1; jj >= 0; --jj) {
        if (!before(corner(k, jj))) {
          j = jj;
          break;
        }
      }
      if (j >= 0) break;
    }
    if (j < 0) return {{constant_term(s_.low)}, s_.start};  // unreachable: t >= start
    // The end of this segment: the next offset, else the next pulse, else
    // (after the last pulse) its end or never.
    double end;
    const bool last_segment = j + 1 == static_cast<int>(offsets_.size());
    if (!last_segment) {
      end = corner(k, j + 1);
    } else if (k + 1 < count) {
      end = corner(k + 1, 0);
    } else {
      const double train_end = s_.start + count * s_.period;
      if (last_is_low_ || !before(train_end)) return {{constant_term(s_.low)}, kInf};
      end = train_end;
    }
    const double seg_start = corner(k, j);
    const double swing = s_.high - s_.low;
    switch (kind(offsets_[static_cast<std::size_t>(j)])) {
      case Segment::Rise: {
        const double slope = swing / s_.rise;
        return {{constant_term(s_.low + slope * (t - seg_start)), ramp_term(slope)}, end};
      }
      case Segment::High: return {{constant_term(s_.high)}, end};
      case Segment::Fall: {
        const double slope = -swing / s_.fall;
        return {{constant_term(s_.high + slope * (t - seg_start)), ramp_term(slope)}, end};
      }
      case Segment::Low: break;
    }
    return {{constant_term(s_.low)}, end};
  }

 private:
  enum class Segment { Rise, High, Fall, Low };
  Segment kind(double offset) const {
    if (offset < s_.rise) return Segment::Rise;
    if (offset < s_.rise + s_.width) return Segment::High;
    if (offset < s_.rise + s_.width + s_.fall) return Segment::Fall;
    return Segment::Low;
  }
  double corner(double k, int j) const {
    return s_.start + k * s_.period + offsets_[static_cast<std::size_t>(j)];
  }

  PulseSpec s_;
  std::vector<double> offsets_;
  bool last_is_low_ = true;
};

// --- sine -------------------------------------------------------------------

class SineWaveform final : public ExactLeaf {
 public:
  SineWaveform(double freq, double amp, double mean, double phase, double start, double tau)
      : freq_(freq), amp_(amp), mean_(mean), phase_(phase), start_(start),
        tau_(tau > 0 && std::isfinite(tau) ? tau : kInf) {}

  std::vector<double> corners(double t_end) const override {
    std::vector<double> out;
    add_corner(out, start_, t_end);
    return out;
  }
  std::string describe() const override {
    std::string out = "sine(freq=" + format_si(freq_, "Hz") + ", amp=" + num(amp_) +
                      ", mean=" + num(mean_) + ", phase=" + num(phase_) +
                      ", start=" + sec(start_);
    if (std::isfinite(tau_)) out += ", tau=" + sec(tau_);
    return out + ")";
  }

 protected:
  Located locate(double t, bool from_left) const override {
    // Before start: the value at start, mean + amp*sin(phase).
    if (from_left ? t <= start_ : t < start_) {
      return {{constant_term(mean_ + amp_ * std::sin(phase_))}, start_};
    }
    const double elapsed = t - start_;
    const double envelope = std::isfinite(tau_) ? std::exp(-elapsed / tau_) : 1.0;
    const double rate = std::isfinite(tau_) ? -1.0 / tau_ : 0.0;
    // sin(x) = cos(x - pi/2); the phase at t reduced to whole turns.
    const double angle = turns_to_angle(freq_ * elapsed) + phase_ - kPi / 2;
    std::vector<ExpPolyTerm> terms;
    if (mean_ != 0) terms.push_back(constant_term(mean_));
    terms.push_back(ExpPolyTerm{amp_ * envelope, 0, rate, 2 * kPi * freq_, angle});
    return {std::move(terms), kInf};
  }

 private:
  double freq_, amp_, mean_, phase_, start_, tau_;
};

// --- approach ---------------------------------------------------------------

class ApproachWaveform final : public ExactLeaf {
 public:
  ApproachWaveform(double to, double tau, double from, double at)
      : to_(to), tau_(tau), from_(from), at_(at) {}

  std::vector<double> corners(double t_end) const override {
    std::vector<double> out;
    add_corner(out, at_, t_end);
    return out;
  }
  std::string describe() const override {
    return "approach(to=" + num(to_) + ", tau=" + sec(tau_) + ", from=" + num(from_) +
           ", at=" + sec(at_) + ")";
  }

 protected:
  Located locate(double t, bool from_left) const override {
    if (from_left ? t <= at_ : t < at_) return {{constant_term(from_)}, at_};
    // tau <= 0 would be an instant jump to `to`; infinite tau never moves.
    if (!(tau_ > 0)) return {{constant_term(to_)}, kInf};
    if (!std::isfinite(tau_)) return {{constant_term(from_)}, kInf};
    const double gap = (from_ - to_) * std::exp(-(t - at_) / tau_);
    return {{constant_term(to_), ExpPolyTerm{gap, 0, -1.0 / tau_, 0, 0}}, kInf};
  }

 private:
  double to_, tau_, from_, at_;
};

// --- points and samples -----------------------------------------------------

class PointsWaveform final : public ExactLeaf {
 public:
  PointsWaveform(std::vector<std::pair<double, double>> points, std::string file)
      : points_(std::move(points)), file_(std::move(file)) {
    if (points_.empty()) throw std::invalid_argument("points: no points");
  }

  std::vector<double> corners(double t_end) const override {
    std::vector<double> out;
    for (const auto& p : points_) add_corner(out, p.first, t_end);
    sort_unique(out);
    return out;
  }
  std::string describe() const override {
    if (!file_.empty()) {
      return "samples(\"" + file_ + "\", " + std::to_string(points_.size()) + " points from " +
             sec(points_.front().first) + " to " + sec(points_.back().first) + ")";
    }
    std::string out = "points(";
    // Long lists are shortened: `inspect` wants one readable line.
    constexpr std::size_t kShown = 6;
    for (std::size_t k = 0; k < points_.size(); ++k) {
      if (k == kShown && points_.size() > kShown + 1) {
        out += ", ... (" + std::to_string(points_.size() - kShown - 1) + " more)";
        k = points_.size() - 1;
      }
      if (k > 0) out += ", ";
      out += sec(points_[k].first) + " " + num(points_[k].second);
    }
    return out + ")";
  }

 protected:
  Located locate(double t, bool from_left) const override {
    // Index of the first point after t (at or after t, from the left).
    const auto it = from_left
                        ? std::lower_bound(points_.begin(), points_.end(), t,
                                           [](const auto& p, double x) { return p.first < x; })
                        : std::upper_bound(points_.begin(), points_.end(), t,
                                           [](double x, const auto& p) { return x < p.first; });
    if (it == points_.begin()) return {{constant_term(points_.front().second)}, it->first};
    if (it == points_.end()) return {{constant_term(points_.back().second)}, kInf};
    const auto& a = *(it - 1);
    const auto& b = *it;
    const double slope = (b.second - a.second) / (b.first - a.first);
    return {{constant_term(a.second + slope * (t - a.first)), ramp_term(slope)}, b.first};
  }

 private:
  std::vector<std::pair<double, double>> points_;
  std::string file_;
};

// --- combinations -------------------------------------------------------------

class SumWaveform final : public Waveform {
 public:
  explicit SumWaveform(std::vector<WaveformPtr> terms) : terms_(std::move(terms)) {}
  double value(double t) const override {
    double sum = 0;
    for (const auto& w : terms_) sum += w->value(t);
    return sum;
  }
  std::vector<double> corners(double t_end) const override {
    std::vector<double> out;
    for (const auto& w : terms_) {
      const auto c = w->corners(t_end);
      out.insert(out.end(), c.begin(), c.end());
    }
    sort_unique(out);
    return out;
  }
  bool is_exact() const override {
    return std::all_of(terms_.begin(), terms_.end(), [](const auto& w) { return w->is_exact(); });
  }
  WaveformPiece piece(double t_begin) const override {
    WaveformPiece out{t_begin, kInf, {}};
    for (const auto& w : terms_) {
      WaveformPiece p = w->piece(t_begin);
      out.end = std::min(out.end, p.end);
      out.terms.insert(out.terms.end(), p.terms.begin(), p.terms.end());
    }
    return out;
  }
  std::string describe() const override {
    std::string out = "(";
    for (std::size_t k = 0; k < terms_.size(); ++k) {
      if (k > 0) out += " + ";
      out += terms_[k]->describe();
    }
    return out + ")";
  }

 private:
  std::vector<WaveformPtr> terms_;
};

class ScaledWaveform final : public Waveform {
 public:
  ScaledWaveform(double factor, WaveformPtr inner) : factor_(factor), inner_(std::move(inner)) {}
  double value(double t) const override { return factor_ * inner_->value(t); }
  std::vector<double> corners(double t_end) const override { return inner_->corners(t_end); }
  bool is_exact() const override { return inner_->is_exact(); }
  WaveformPiece piece(double t_begin) const override {
    WaveformPiece p = inner_->piece(t_begin);
    for (auto& term : p.terms) term.coef *= factor_;
    return p;
  }
  std::string describe() const override {
    return "(" + num(factor_) + " * " + inner_->describe() + ")";
  }

 private:
  double factor_;
  WaveformPtr inner_;
};

class FormulaWaveform final : public Waveform {
 public:
  FormulaWaveform(std::function<double(double)> f, std::string text)
      : f_(std::move(f)), text_(std::move(text)) {}
  // Before 0 the value at 0 (the expressions of NETLIST.md section 3 are
  // continuous in t wherever they are finite, so this is the left limit).
  double value(double t) const override { return f_(std::max(t, 0.0)); }
  std::vector<double> corners(double) const override { return {}; }
  bool is_exact() const override { return false; }
  WaveformPiece piece(double) const override {
    throw std::logic_error("formula(" + text_ + ") has no exact pieces; fit it instead");
  }
  std::string describe() const override { return "formula(" + text_ + ")"; }

 private:
  std::function<double(double)> f_;
  std::string text_;
};

// --- crossings ----------------------------------------------------------------

// The instant in (lo, hi] where `above` switches from its value at lo to the
// other one, by bisection on the predicate down to adjacent doubles.
template <class Above>
double bisect(Above above, double lo, double hi) {
  const bool at_lo = above(lo);
  for (int iteration = 0; iteration < 200; ++iteration) {
    const double mid = lo + (hi - lo) / 2;
    if (!(mid > lo && mid < hi)) break;
    if (above(mid) == at_lo) {
      lo = mid;
    } else {
      hi = mid;
    }
  }
  return hi;
}

// A piece that is a straight line (constants and ramps only): a + b tau.
bool linear_coefficients(const std::vector<ExpPolyTerm>& terms, double& a, double& b) {
  a = 0;
  b = 0;
  for (const auto& term : terms) {
    if (term.rate != 0 || term.omega != 0 || term.power > 1) return false;
    const double c = term.coef * (term.phase != 0 ? std::cos(term.phase) : 1.0);
    (term.power == 0 ? a : b) += c;
  }
  return true;
}

// Sampling step count for a piece of length `span`.
double samples_for(const std::vector<ExpPolyTerm>& terms, double span) {
  double fastest = 0;
  for (const auto& term : terms) {
    fastest = std::max(fastest, std::fabs(term.omega));
    // A decaying or growing term changes shape over about 1/|rate|.
    fastest = std::max(fastest, std::fabs(term.rate) / 4);
  }
  const double periods = span * fastest / (2 * kPi);
  return std::clamp(std::ceil(periods * kSamplesPerPeriod),
                    static_cast<double>(kMinSamplesPerPiece), kMaxSamplesPerPiece);
}

}  // namespace

double evaluate(const WaveformPiece& piece, double t) { return sum_terms(piece.terms, t - piece.begin); }

std::vector<std::pair<double, int>> Waveform::crossings(double level, double t_end) const {
  std::vector<std::pair<double, int>> out;
  if (!(t_end > 0)) return out;
  const auto record = [&](double t, bool now_above) { out.emplace_back(t, now_above ? 1 : -1); };

  if (!is_exact()) {
    // No closed form: sample value() uniformly and bisect each bracket.
    const auto above = [&](double t) { return value(t) > level; };
    bool state = above(0.0);
    double previous = 0.0;
    for (int k = 1; k <= kFormulaCrossingSamples; ++k) {
      const double t = t_end * k / kFormulaCrossingSamples;
      const bool now = above(t);
      if (now != state) {
        record(bisect(above, previous, t), now);
        state = now;
      }
      previous = t;
    }
    return out;
  }

  double begin = 0.0;
  bool state = value(0.0) > level;  // a jump at exactly t = 0 is not in (0, t_end]
  for (;;) {
    const WaveformPiece p = piece(begin);
    const auto above = [&](double t) { return evaluate(p, t) > level; };
    // A jump (or a continuous arrival) at the piece's start.
    const bool at_begin = above(begin);
    if (begin > 0 && at_begin != state) record(begin, at_begin);
    state = at_begin;
    const double end = std::min(p.end, t_end);
    if (end > begin) {
      double a, b;
      if (linear_coefficients(p.terms, a, b)) {
        // value = a + b tau: one root at most, solved directly.
        const double v_end = a + b * (end - begin);
        const bool at_end = v_end > level;
        if (at_end != state && b != 0) {
          const double t = begin + (level - a) / b;
          record(std::clamp(t, begin, end), at_end);
          state = at_end;
        }
      } else {
        const double n = samples_for(p.terms, end - begin);
        double previous = begin;
        for (double k = 1; k <= n; k += 1) {
          const double t = k == n ? end : begin + (end - begin) * (k / n);
          const bool now = above(t);
          if (now != state) {
            record(bisect(above, previous, t), now);
            state = now;
          }
          previous = t;
        }
      }
    }
    if (!(p.end <= t_end)) break;
    if (!(p.end > begin)) {
      throw std::logic_error("waveform piece does not advance at t = " + std::to_string(begin));
    }
    begin = p.end;
  }
  return out;
}

WaveformPtr make_constant(double value) { return std::make_shared<ConstantWaveform>(value); }
WaveformPtr make_step(double from, double to, double at, double rise) {
  return std::make_shared<StepWaveform>(from, to, at, rise);
}
WaveformPtr make_pulse(const PulseSpec& spec) { return std::make_shared<PulseWaveform>(spec); }
WaveformPtr make_sine(double freq, double amp, double mean, double phase, double start,
                      double tau) {
  return std::make_shared<SineWaveform>(freq, amp, mean, phase, start, tau);
}
WaveformPtr make_approach(double to, double tau, double from, double at) {
  return std::make_shared<ApproachWaveform>(to, tau, from, at);
}
WaveformPtr make_points(std::vector<std::pair<double, double>> points) {
  return std::make_shared<PointsWaveform>(std::move(points), std::string());
}
WaveformPtr make_samples(std::vector<std::pair<double, double>> points, std::string file) {
  return std::make_shared<PointsWaveform>(std::move(points), std::move(file));
}
WaveformPtr make_sum(std::vector<WaveformPtr> terms) {
  return std::make_shared<SumWaveform>(std::move(terms));
}
WaveformPtr make_scaled(double factor, WaveformPtr waveform) {
  return std::make_shared<ScaledWaveform>(factor, std::move(waveform));
}
WaveformPtr make_formula(std::function<double(double)> f, std::string text) {
  return std::make_shared<FormulaWaveform>(std::move(f), std::move(text));
}

}  // namespace ringdown
