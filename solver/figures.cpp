// Figures of NETLIST.md section 7 on the exact solution (see figures.hpp).
//
// How a window [a, b] of a signal is scanned:
//  1. Nodes: a, b, the output samples and the corners inside (a, b); between consecutive
//     nodes a few more: kRefineSubintervals when the trajectory gives no bracket step, else
//     ceil(interval / bracket_step()) (one, the samples alone, when the grid resolves the
//     fastest ringing), with a few nodes at halving distances after each piece's start.
//     Each node holds the value and the derivative; at a corner the left limit ends one
//     piece and the right limit starts the next, with a "jump node" between them when the
//     signal steps there.
//  2. Extrema: sign changes of the derivative along the nodes, refined by Brent's zero
//     finder on derivative(); a sign change across a corner (a kink or a jump) is an
//     extremum at the corner itself. The refined extrema are inserted as nodes, so
//     between two consecutive nodes of a piece the signal is monotone.
//  3. Crossings of a level: sign changes of value - level along those monotone nodes,
//     refined by Brent on value(); across a jump, the corner itself.
// Brent's method: R. P. Brent, Algorithms for Minimization without Derivatives (1973),
// ch. 4, "zero"; written here in the form of Press et al., Numerical Recipes 3rd ed. (2007),
// sec. 9.3 (from memory). Integrals: Gauss-Legendre rules of 8 and 16 points (nodes by
// Newton's method on the Legendre recurrence, Numerical Recipes sec. 4.6) compared on each
// interval between samples and corners, halving the interval until they agree.
//
// Not here: a check of ringfreq/damping against the dominant natural mode (the engine owns
// the modes), and anything about printing.
#include "solver/figures.hpp"

#include "solver/golden_section.hpp"

#include <algorithm>
#include <cmath>
#include <functional>
#include <limits>
#include <memory>
#include <numbers>
#include <optional>
#include <sstream>

namespace ringdown::solver {
namespace {

// Root finders stop when the bracket is below this fraction of the window (the brief's
// "about 1e-13 relative in time"), or at a few ulps of t.
constexpr double kTimeTolerance = 1e-13;
// Extra subintervals per sample interval when bracketing: with 10 samples per ring period
// this gives 50 nodes per period, 25 per half period between extrema. Common practice,
// no source.
constexpr int kRefineSubintervals = 5;
// Cap on subintervals per sample interval requested through bracket_step(), so that a
// pathological hint cannot make a figure run for hours.
constexpr long kMaxSubintervals = 100000;
// With a bracket step the grid may be the samples alone (every sample interval resolves
// the ringing); in the first interval of each piece nodes at 1/2, 1/4, ... 1/32 of it
// catch a transient of real modes faster than the grid (common practice, no source).
constexpr int kPieceStartHalvings = 5;
// Quadrature: accept an interval when the 8- and 16-point rules agree to this fraction of
// the integral of |f| over the window (figures promise 1e-9). Not tighter: on stiff networks
// the exact solution between samples is itself good to about 1e-13..1e-12 of its peak, and a
// rule comparison below that noise only subdivides to the depth limit (measured: a 20 s
// safety-screen rms on the flyback example at 1e-12).
constexpr double kIntegralTolerance = 1e-10;
constexpr int kMaxQuadratureDepth = 40;
// Steps, ties and jumps are judged against the largest |S| seen in the window.
constexpr double kStepZeroRelative = 1e-12;  // |step| below this: step = 0
constexpr double kTieRelative = 1e-12;       // tmax/tmin: values this close are ties
constexpr double kJumpRelative = 1e-9;       // a corner with a larger difference jumps
// Excursions below this fraction of max |S| are rounding noise, not crossings or ringing
// (the engine's exact propagation holds about 1e-12 relative; issue 3). Common practice,
// no source.
constexpr double kNoiseRelative = 1e-10;
// ringfreq and damping look only at ringing above this fraction of max |S|: below it a
// crossing's instant is known only to eps / (fraction * w) of the period, which would spoil
// the mean interval (at 1e-7 each crossing still holds about 1e-9 of a period).
constexpr double kRingNoiseRelative = 1e-7;
// Golden-section search (Kiefer 1953) for the largest |dS/dt|: stop at this fraction of
// the window; the maximum's value is then exact to rounding (it is quadratic there).
constexpr double kGoldenTolerance = 1e-11;
constexpr int kMaxIterations = 300;

// A scalar function of time with its derivative, and the left limits at corners.
struct Curve {
  std::function<double(double)> value, derivative, value_before, derivative_before;
};

Curve signal_curve(const Trajectory& tr, std::size_t k) {
  return {[&tr, k](double t) { return tr.value(k, t); },
          [&tr, k](double t) { return tr.derivative(k, t); },
          [&tr, k](double t) { return tr.value_before(k, t); },
          [&tr, k](double t) { return tr.derivative_before(k, t); }};
}

// X.p = X.v * X.i, with the product rule for its derivative.
Curve product_curve(const Trajectory& tr, std::size_t v, std::size_t i) {
  return {[&tr, v, i](double t) { return tr.value(v, t) * tr.value(i, t); },
          [&tr, v, i](double t) {
            return tr.derivative(v, t) * tr.value(i, t) + tr.value(v, t) * tr.derivative(i, t);
          },
          [&tr, v, i](double t) { return tr.value_before(v, t) * tr.value_before(i, t); },
          [&tr, v, i](double t) {
            return tr.derivative_before(v, t) * tr.value_before(i, t) +
                   tr.value_before(v, t) * tr.derivative_before(i, t);
          }};
}

constexpr std::size_t kNoNode = std::numeric_limits<std::size_t>::max();

int sign_of(double x) { return x > 0 ? 1 : (x < 0 ? -1 : 0); }

// Brent's zero finder on [a, b] with f(a) = fa, f(b) = fb of opposite signs.
double brent_zero(const std::function<double(double)>& f, double a, double b, double fa,
                  double fb, double tol) {
  constexpr double eps = std::numeric_limits<double>::epsilon();
  if (fa == 0) return a;
  if (fb == 0) return b;
  double c = b, fc = fb, d = b - a, e = d;
  for (int iter = 0; iter < kMaxIterations; ++iter) {
    if ((fb > 0 && fc > 0) || (fb < 0 && fc < 0)) {
      c = a;
      fc = fa;
      d = e = b - a;
    }
    if (std::abs(fc) < std::abs(fb)) {
      a = b;
      b = c;
      c = a;
      fa = fb;
      fb = fc;
      fc = fa;
    }
    const double tol1 = 2 * eps * std::abs(b) + 0.5 * tol;
    const double xm = 0.5 * (c - b);
    if (std::abs(xm) <= tol1 || fb == 0) return b;
    if (std::abs(e) >= tol1 && std::abs(fa) > std::abs(fb)) {
      // Inverse quadratic interpolation (secant when only two points are distinct).
      const double s = fb / fa;
      double p, q;
      if (a == c) {
        p = 2 * xm * s;
        q = 1 - s;
      } else {
        const double qa = fa / fc, r = fb / fc;
        p = s * (2 * xm * qa * (qa - r) - (b - a) * (r - 1));
        q = (qa - 1) * (r - 1) * (s - 1);
      }
      if (p > 0) q = -q;
      p = std::abs(p);
      if (2 * p < std::min(3 * xm * q - std::abs(tol1 * q), std::abs(e * q))) {
        e = d;
        d = p / q;
      } else {
        d = xm;
        e = d;
      }
    } else {
      d = xm;
      e = d;
    }
    a = b;
    fa = fb;
    b += std::abs(d) > tol1 ? d : std::copysign(tol1, xm);
    fb = f(b);
  }
  return b;
}

// Golden-section search for the maximum of g on [lo, hi].
double golden_max(const std::function<double(double)>& g, double lo, double hi, double tol) {
  return golden_section_max(g, lo, hi, tol, kMaxIterations).best;
}

struct Node {
  double t = 0;
  double v = 0;           // value (NaN on a jump node)
  double d = 0;           // derivative (+-inf on a jump node: the step's direction)
  bool smooth_next = false;  // the next node lies on the same smooth piece
  bool jump = false;
};

struct Extremum {
  double t = 0;
  double v = 0;
  bool is_max = false;
};

struct Crossing {
  double t = 0;
  bool up = false;
};

struct Jump {
  double t = 0;
  double size = 0;
};

// One window of one curve, scanned as described atop the file.
class Scan {
 public:
  // `signal`: the trajectory signal the curve is, whose samples are then read in one pass
  // (Trajectory::at_samples); kNoNode for any other curve.
  Scan(Curve curve, const Trajectory& tr, double a, double b, std::size_t signal = kNoNode)
      : curve_(std::move(curve)), a_(a), b_(b), tol_(kTimeTolerance * (b - a)) {
    build_nodes(tr, signal);
    find_extrema();
  }

  const std::vector<Node>& nodes() const { return nodes_; }
  const std::vector<Extremum>& extrema() const { return extrema_; }
  const std::vector<Jump>& jumps() const { return jumps_; }
  double scale() const { return scale_; }
  const Curve& curve() const { return curve_; }

  // Crossings of `level` strictly inside (a, b), in time order. A crossing is a change of
  // side; touching the level and turning back is none. A side counts only beyond a noise
  // band of kNoiseRelative * scale around the level, so that the rounding noise of a
  // settled tail (S - final ~ 1e-17) is not taken for ringing; the instant is then the
  // first genuine sign change of S - level between the two sides.
  std::vector<Crossing> crossings(double level, double noise_relative = kNoiseRelative) const {
    std::vector<Crossing> out;
    const double noise = noise_relative * scale_;
    int last_sign = 0;
    std::size_t last = 0;
    for (std::size_t j = 0; j < nodes_.size(); ++j) {
      const Node& n = nodes_[j];
      if (n.jump) continue;
      const double g = n.v - level;
      const int sg = g > noise ? 1 : (g < -noise ? -1 : 0);
      if (sg == 0) continue;
      if (last_sign != 0 && sg != last_sign) {
        const double t = crossing_between(last, j, level);
        if (t > a_ && t < b_) out.push_back({t, sg > 0});
      }
      last_sign = sg;
      last = j;
    }
    return out;
  }

  // Largest (sign = +1) or smallest (sign = -1) value over the window, ends and both sides
  // of every corner included; the instant is the earliest among ties.
  std::pair<double, double> extreme(int sign) const {
    double best = -std::numeric_limits<double>::infinity();
    for (const Node& n : nodes_)
      if (!n.jump) best = std::max(best, sign * n.v);
    const double tie = kTieRelative * std::max(scale_, std::abs(best));
    for (const Node& n : nodes_)
      if (!n.jump && sign * n.v >= best - tie) return {sign * best, n.t};
    return {sign * best, a_};
  }

  // Largest |dS/dt| inside the smooth pieces (jumps excluded).
  double max_abs_derivative() const {
    double best = 0;
    const auto g = [this](double x) { return std::abs(curve_.derivative(x)); };
    for (std::size_t j = 0; j < nodes_.size(); ++j) {
      const Node& n = nodes_[j];
      if (n.jump) continue;
      const double here = std::abs(n.d);
      best = std::max(best, here);
      // An interior local maximum of |d| among three nodes of one smooth piece: refine.
      if (j > 0 && j + 1 < nodes_.size() && nodes_[j - 1].smooth_next && n.smooth_next &&
          !nodes_[j - 1].jump && here >= std::abs(nodes_[j - 1].d) &&
          here >= std::abs(nodes_[j + 1].d)) {
        best = std::max(best, golden_max(g, nodes_[j - 1].t, nodes_[j + 1].t,
                                         kGoldenTolerance * (b_ - a_)));
      }
    }
    return best;
  }

 private:
  // The instant S crosses `level` between nodes i < j that lie on opposite sides of it:
  // the first node exactly on it, or the first sign change (Brent on a smooth pair, the
  // corner itself across a jump).
  double crossing_between(std::size_t i, std::size_t j, double level) const {
    std::size_t prev = i;
    for (std::size_t k = i + 1; k <= j; ++k) {
      if (nodes_[k].jump) continue;
      const double gp = nodes_[prev].v - level, gk = nodes_[k].v - level;
      if (gk == 0) return nodes_[k].t;
      if ((gp < 0) != (gk < 0)) {
        if (k == prev + 1 && nodes_[prev].smooth_next) {
          const auto g = [this, level](double x) { return curve_.value(x) - level; };
          return brent_zero(g, nodes_[prev].t, nodes_[k].t, gp, gk, tol_);
        }
        return nodes_[k].t;  // crossed by a jump at a corner
      }
      prev = k;
    }
    return nodes_[j].t;
  }

  void build_nodes(const Trajectory& tr, std::size_t signal) {
    std::vector<double> cuts;
    bool end_is_corner = false;
    for (double c : tr.corners()) {
      if (c > a_ && c < b_) cuts.push_back(c);
      if (c == b_) end_is_corner = true;
    }
    const std::vector<double> all_samples = tr.sample_times();
    // The signal at every sample, in one pass, when the curve is a trajectory signal: the
    // nodes at samples take these (the same numbers value() and derivative() give there).
    std::vector<double> sv, sd;
    if (signal != kNoNode) {
      sv.resize(all_samples.size());
      sd.resize(all_samples.size());
      tr.at_samples(&signal, 1, sv.data(), sd.data());
    }
    std::vector<double> samples;
    std::vector<std::size_t> sample_index;  // into all_samples
    for (std::size_t k = 0; k < all_samples.size(); ++k)
      if (all_samples[k] > a_ && all_samples[k] < b_) {
        samples.push_back(all_samples[k]);
        sample_index.push_back(k);
      }
    std::sort(cuts.begin(), cuts.end());
    if (!std::is_sorted(samples.begin(), samples.end())) {  // sample_times() is sorted; be safe
      sv.clear();
      std::sort(samples.begin(), samples.end());
    }

    std::vector<double> bounds{a_};
    bounds.insert(bounds.end(), cuts.begin(), cuts.end());
    bounds.push_back(b_);
    const double step = tr.bracket_step();

    std::vector<std::vector<Node>> pieces;
    std::size_t si = 0;
    for (std::size_t k = 0; k + 1 < bounds.size(); ++k) {
      const double p0 = bounds[k], p1 = bounds[k + 1];
      if (!(p1 > p0)) continue;
      std::vector<double> coarse{p0};
      std::vector<std::size_t> coarse_sample{kNoNode};  // index into all_samples, or kNoNode
      while (si < samples.size() && samples[si] <= p0) ++si;
      while (si < samples.size() && samples[si] < p1) {
        coarse_sample.push_back(sv.empty() ? kNoNode : sample_index[si]);
        coarse.push_back(samples[si++]);
      }
      coarse.push_back(p1);
      std::vector<double> times;
      std::vector<std::size_t> time_sample;  // per time: its sample, or kNoNode
      for (std::size_t m = 0; m + 1 < coarse.size(); ++m) {
        const double x0 = coarse[m], x1 = coarse[m + 1];
        long sub = kRefineSubintervals;
        if (step > 0) {
          const double want = std::ceil((x1 - x0) / step);
          sub = want >= static_cast<double>(kMaxSubintervals) ? kMaxSubintervals
                                                              : std::max(1L, static_cast<long>(want));
        }
        // After the start of a piece (the window's start, a corner), where fast real modes
        // die out, a few nodes at halving distances when the interval itself is not split.
        const bool geometric = m == 0 && step > 0 && sub < kRefineSubintervals;
        for (long q = 0; q < sub; ++q) {
          times.push_back(x0 + (x1 - x0) * q / sub);
          time_sample.push_back(q == 0 ? coarse_sample[m] : kNoNode);
          if (q == 0 && geometric)
            for (int j = kPieceStartHalvings; j >= 1; --j) {
              times.push_back(x0 + (x1 - x0) / sub * std::ldexp(1.0, -j));
              time_sample.push_back(kNoNode);
            }
        }
      }
      times.push_back(p1);
      time_sample.push_back(kNoNode);
      const bool left_limit_at_end = k + 2 < bounds.size() || end_is_corner;
      std::vector<Node> piece;
      piece.reserve(times.size());
      for (std::size_t q = 0; q < times.size(); ++q) {
        const double t = times[q];
        Node n;
        n.t = t;
        if (q + 1 == times.size() && left_limit_at_end) {
          n.v = curve_.value_before(t);
          n.d = curve_.derivative_before(t);
        } else if (time_sample[q] != kNoNode) {
          n.v = sv[time_sample[q]];
          n.d = sd[time_sample[q]];
        } else {
          n.v = curve_.value(t);
          n.d = curve_.derivative(t);
        }
        n.smooth_next = q + 1 < times.size();
        scale_ = std::max(scale_, std::abs(n.v));
        piece.push_back(n);
      }
      pieces.push_back(std::move(piece));
    }
    if (end_is_corner) {  // the window ends on a corner: its right limit is S(to)
      Node n;
      n.t = b_;
      n.v = curve_.value(b_);
      n.d = curve_.derivative(b_);
      scale_ = std::max(scale_, std::abs(n.v));
      pieces.push_back({n});
    }
    for (std::size_t k = 0; k < pieces.size(); ++k) {
      if (k > 0) {
        const Node& left = nodes_.back();
        const Node& right = pieces[k].front();
        const double size = right.v - left.v;
        if (std::abs(size) > kJumpRelative * scale_) {
          Node j;
          j.t = right.t;
          j.v = std::numeric_limits<double>::quiet_NaN();
          j.d = std::copysign(std::numeric_limits<double>::infinity(), size);
          j.jump = true;
          nodes_.push_back(j);
          jumps_.push_back({right.t, size});
        }
      }
      nodes_.insert(nodes_.end(), pieces[k].begin(), pieces[k].end());
    }
  }

  // Sign changes of the derivative; refined extrema are inserted as nodes.
  void find_extrema() {
    std::vector<Node> out;
    out.reserve(nodes_.size() + 16);
    int last_sign = 0;
    std::size_t last = 0;
    std::size_t zero = kNoNode;  // first node exactly on the level/zero since `last`
    for (std::size_t j = 0; j < nodes_.size(); ++j) {
      const Node& n = nodes_[j];
      const int sg = sign_of(n.d);
      if (sg != 0 && last_sign != 0 && sg != last_sign) {
        Extremum e;
        e.is_max = last_sign > 0;
        if (zero != kNoNode) {
          e.t = nodes_[zero].t;
          e.v = nodes_[zero].v;
        } else if (j == last + 1 && nodes_[last].smooth_next) {
          e.t = brent_zero(curve_.derivative, nodes_[last].t, n.t, nodes_[last].d, n.d, tol_);
          e.v = curve_.value(e.t);
          if (e.t > nodes_[last].t && e.t < n.t) {  // a new node between last and j
            Node m;
            m.t = e.t;
            m.v = e.v;
            m.d = 0;
            m.smooth_next = true;
            out.push_back(m);
          }
        } else {  // across a corner: a kink or a jump
          e.t = n.t;
          e.v = nodes_[last].jump ? n.v : nodes_[last].v;
        }
        if (e.t > a_ && e.t < b_) extrema_.push_back(e);
      }
      out.push_back(n);
      if (sg == 0) {
        if (last_sign != 0 && zero == kNoNode) zero = j;
        continue;
      }
      last_sign = sg;
      last = j;
      zero = kNoNode;
    }
    nodes_ = std::move(out);
  }

  Curve curve_;
  double a_, b_, tol_;
  double scale_ = 0;
  std::vector<Node> nodes_;
  std::vector<Extremum> extrema_;
  std::vector<Jump> jumps_;
};

// --- Quadrature ---------------------------------------------------------------

struct GaussRule {
  std::vector<double> x, w;  // on [-1, 1]
};

// Gauss-Legendre nodes and weights by Newton's method on P_n (Numerical Recipes 3rd ed.,
// 2007, sec. 4.6, "gauleg"; from memory).
GaussRule gauss_legendre(int n) {
  GaussRule r;
  r.x.assign(n, 0);
  r.w.assign(n, 0);
  for (int i = 0; i < (n + 1) / 2; ++i) {
    double z = std::cos(std::numbers::pi * (i + 0.75) / (n + 0.5));
    double pp = 0;
    for (int iter = 0; iter < 100; ++iter) {
      double p1 = 1, p2 = 0;
      for (int j = 0; j < n; ++j) {
        const double p3 = p2;
        p2 = p1;
        p1 = ((2.0 * j + 1) * z * p2 - j * p3) / (j + 1);
      }
      pp = n * (z * p1 - p2) / (z * z - 1);
      const double z1 = z;
      z = z1 - p1 / pp;
      if (std::abs(z - z1) <= 1e-16) break;
    }
    r.x[i] = -z;
    r.x[n - 1 - i] = z;
    r.w[i] = r.w[n - 1 - i] = 2 / ((1 - z * z) * pp * pp);
  }
  return r;
}

const GaussRule& rule8() {
  static const GaussRule r = gauss_legendre(8);
  return r;
}
const GaussRule& rule16() {
  static const GaussRule r = gauss_legendre(16);
  return r;
}

struct Quadrature {
  const std::function<double(double)>& f;
  double abs_total = 0;  // running integral of |f|: the scale of the acceptance test
  double floor = 0;      // a first estimate of the whole window's integral of |f|
  bool converged = true;

  double interval(double x0, double x1, int depth) {
    const double half = 0.5 * (x1 - x0), mid = 0.5 * (x0 + x1);
    double i8 = 0, i16 = 0, a16 = 0;
    for (std::size_t k = 0; k < rule8().x.size(); ++k) i8 += rule8().w[k] * f(mid + half * rule8().x[k]);
    for (std::size_t k = 0; k < rule16().x.size(); ++k) {
      const double y = f(mid + half * rule16().x[k]);
      i16 += rule16().w[k] * y;
      a16 += rule16().w[k] * std::abs(y);
    }
    i8 *= half;
    i16 *= half;
    a16 *= std::abs(half);
    const double scale = std::max({abs_total + a16, floor, std::numeric_limits<double>::min()});
    if (std::abs(i16 - i8) <= kIntegralTolerance * scale || depth >= kMaxQuadratureDepth) {
      if (std::abs(i16 - i8) > kIntegralTolerance * scale) converged = false;
      abs_total += a16;
      return i16;
    }
    return interval(x0, mid, depth + 1) + interval(mid, x1, depth + 1);
  }
};

// Integral of f over [a, b], split at the samples and corners inside (integrand nodes are
// interior, so at a corner only the formula of the interval's own side is used).
double integrate(const std::function<double(double)>& f, const Trajectory& tr, double a,
                 double b, bool& converged) {
  std::vector<double> breaks{a, b};
  for (double s : tr.sample_times())
    if (s > a && s < b) breaks.push_back(s);
  for (double c : tr.corners())
    if (c > a && c < b) breaks.push_back(c);
  std::sort(breaks.begin(), breaks.end());
  breaks.erase(std::unique(breaks.begin(), breaks.end()), breaks.end());
  Quadrature q{f};
  // The scale of the acceptance test from the start: the midpoint rule for the integral of
  // |f| over the breaks. Without it an early stretch where f is rounding noise around 0 (a
  // part that carries no power until a switch opens) would be refined to the depth limit
  // everywhere, its noise never agreeing to 1e-12 of itself.
  for (std::size_t k = 0; k + 1 < breaks.size(); ++k)
    q.floor += std::abs(f(0.5 * (breaks[k] + breaks[k + 1]))) * (breaks[k + 1] - breaks[k]);
  double total = 0;
  for (std::size_t k = 0; k + 1 < breaks.size(); ++k) total += q.interval(breaks[k], breaks[k + 1], 0);
  converged = q.converged;
  return total;
}

// --- Figures -----------------------------------------------------------------

std::string number(double x) {
  std::ostringstream s;
  s.precision(6);
  s << x;
  return s.str();
}

std::string with_unit(double x, const Unit& unit) {
  return unit ? format_si(x, unit_symbol(*unit)) : number(x);
}

Unit times(const Unit& u, const Dimension& d) {
  if (!u) return std::nullopt;
  return *u * d;
}
Unit divided(const Unit& u, const Dimension& d) {
  if (!u) return std::nullopt;
  return *u / d;
}

Unit derived_unit(const std::string& f, const Unit& s) {
  if (f == "tmax" || f == "tmin" || f == "rise" || f == "settle" || f == "when")
    return Dimension::second();
  if (f == "integral") return times(s, Dimension::second());
  if (f == "slope") return divided(s, Dimension::second());
  if (f == "energy") return Dimension::joule();
  if (f == "power") return Dimension::watt();
  if (f == "ringfreq") return Dimension::hertz();
  if (f == "overshoot" || f == "undershoot" || f == "damping") return Dimension::none();
  return s;
}

FigureValue fail(FigureValue r, const std::string& label, const std::string& why) {
  r.ok = false;
  r.value = std::numeric_limits<double>::quiet_NaN();
  r.error = label + ": " + why;
  return r;
}

double arg_or(const FigureCall& call, const char* key, double fallback) {
  const auto it = call.args.find(key);
  return it == call.args.end() ? fallback : it->second;
}

}  // namespace

struct ScanMemo::Impl {
  struct Kept {
    const Trajectory* trajectory;
    std::size_t signal;
    double a, b;
    std::unique_ptr<const Scan> scan;
  };
  std::vector<Kept> kept;

  const Scan& scan(const Trajectory& tr, std::size_t signal, double a, double b) {
    for (const Kept& k : kept)
      if (k.trajectory == &tr && k.signal == signal && k.a == a && k.b == b) return *k.scan;
    kept.push_back({&tr, signal, a, b, std::make_unique<const Scan>(signal_curve(tr, signal), tr, a, b, signal)});
    return *kept.back().scan;
  }
};
ScanMemo::ScanMemo() : impl(std::make_unique<Impl>()) {}
ScanMemo::~ScanMemo() = default;

FigureValue evaluate_figure(const FigureCall& call, const Trajectory& trajectory,
                            std::size_t signal_index,
                            std::optional<std::pair<std::size_t, std::size_t>> power_signals,
                            ScanMemo* memo) {
  const std::string& f = call.function;
  const Unit signal_unit = call.signal ? call.signal->unit : Unit{};
  const std::string signal_name = call.signal ? call.signal->name : std::string("its part");
  const std::string label = !call.text.empty() ? call.text : f + "(" + signal_name + ")";
  FigureValue r;
  r.unit = call.unit ? call.unit : derived_unit(f, signal_unit);

  static const char* const kKnown[] = {"max",      "min",    "peak",      "pp",         "tmax",
                                       "tmin",     "final",  "at",        "mean",       "rms",
                                       "integral", "slope",  "energy",    "power",      "overshoot",
                                       "undershoot", "rise", "settle",    "ringfreq",   "damping",
                                       "when"};
  if (std::find(std::begin(kKnown), std::end(kKnown), f) == std::end(kKnown))
    return fail(r, label, "unknown figure '" + f + "'");

  // --- The window -------------------------------------------------------------
  const double start = trajectory.start(), end = trajectory.end();
  const double a = arg_or(call, "from", start), b = arg_or(call, "to", end);
  if (!std::isfinite(a) || !std::isfinite(b) || a < start || b > end)
    return fail(r, label, "window from=" + number(a) + " s to=" + number(b) +
                              " s reaches outside the run [" + number(start) + ", " +
                              number(end) + "] s");
  if (f != "at" && !(b > a))
    return fail(r, label, "empty window: from=" + number(a) + " s is not before to=" +
                              number(b) + " s");

  // --- energy, power: the integral of X.v * X.i ----------------------------------
  if (f == "energy" || f == "power") {
    if (!power_signals) return fail(r, label, "the part's voltage and current were not supplied");
    const Curve p = product_curve(trajectory, power_signals->first, power_signals->second);
    bool converged = true;
    const double e = integrate(p.value, trajectory, a, b, converged);
    r.value = f == "energy" ? e : e / (b - a);
    if (!converged) r.note = "quadrature did not reach its tolerance";
    return r;
  }

  const Curve s = signal_curve(trajectory, signal_index);

  if (f == "at") {
    const auto it = call.args.find("t");
    if (it == call.args.end()) return fail(r, label, "at() needs an instant t");
    const double t = it->second;
    if (!(t >= start && t <= end))
      return fail(r, label, "t = " + number(t) + " s is outside the run [" + number(start) +
                                ", " + number(end) + "] s");
    r.value = s.value(t);
    return r;
  }
  if (f == "final") {
    r.value = s.value(b);
    return r;
  }
  if (f == "mean" || f == "rms" || f == "integral") {
    bool converged = true;
    double v;
    if (f == "rms") {
      const std::function<double(double)> sq = [&s](double t) {
        const double y = s.value(t);
        return y * y;
      };
      v = std::sqrt(integrate(sq, trajectory, a, b, converged) / (b - a));
    } else {
      v = integrate(s.value, trajectory, a, b, converged);
      if (f == "mean") v /= b - a;
    }
    r.value = v;
    if (!converged) r.note = "quadrature did not reach its tolerance";
    return r;
  }

  std::optional<Scan> own;
  if (!memo) own.emplace(s, trajectory, a, b, signal_index);
  const Scan& scan = memo ? memo->impl->scan(trajectory, signal_index, a, b) : *own;

  if (f == "max" || f == "min" || f == "peak" || f == "pp" || f == "tmax" || f == "tmin") {
    const auto [hi, thi] = scan.extreme(+1);
    const auto [lo, tlo] = scan.extreme(-1);
    if (f == "max") r.value = hi;
    if (f == "min") r.value = lo;
    if (f == "peak") r.value = std::max(std::abs(hi), std::abs(lo));
    if (f == "pp") r.value = hi - lo;
    if (f == "tmax") r.value = thi;
    if (f == "tmin") r.value = tlo;
    return r;
  }
  if (f == "slope") {
    r.value = scan.max_abs_derivative();
    const auto& jumps = scan.jumps();
    if (!jumps.empty()) {
      const auto big = std::max_element(jumps.begin(), jumps.end(), [](const Jump& x, const Jump& y) {
        return std::abs(x.size) < std::abs(y.size);
      });
      r.note = signal_name + " jumps by " + with_unit(big->size, signal_unit) + " at t = " +
               format_si(big->t, "s") + " (a step seen directly, not counted as slope)";
      if (jumps.size() > 1) r.note += "; " + std::to_string(jumps.size()) + " jumps in all";
    }
    return r;
  }
  if (f == "when") {
    const auto it = call.args.find("level");
    if (it == call.args.end()) return fail(r, label, "when() needs a level");
    const double level = it->second;
    const double nth_arg = arg_or(call, "nth", 1);
    if (!(nth_arg >= 1) || nth_arg != std::floor(nth_arg) || nth_arg > 1e9)
      return fail(r, label, "nth=" + number(nth_arg) + " must be a whole number >= 1");
    const auto nth = static_cast<std::size_t>(nth_arg);
    if (call.edge != "up" && call.edge != "down" && call.edge != "any")
      return fail(r, label, "edge=" + call.edge + " must be up, down or any");
    std::vector<double> hits;
    for (const Crossing& c : scan.crossings(level))
      if (call.edge == "any" || (call.edge == "up") == c.up) hits.push_back(c.t);
    if (hits.size() < nth) {
      const std::string which = call.edge == "any" ? "" : call.edge + " ";
      return fail(r, label, signal_name + " crosses " + with_unit(level, signal_unit) + " " +
                                std::to_string(hits.size()) + " time(s) " + which +
                                "in the window; nth=" + std::to_string(nth) + " was asked");
    }
    r.value = hits[nth - 1];
    return r;
  }

  const double initial = s.value(a), final_value = s.value(b), step = final_value - initial;
  const double window_scale = std::max({scan.scale(), std::abs(initial), std::abs(final_value)});

  if (f == "ringfreq") {
    const auto c = scan.crossings(final_value, kRingNoiseRelative);
    if (c.size() < 3) {
      r.value = 0;
      r.note = "does not ring";
      return r;
    }
    const double mean_interval = (c.back().t - c.front().t) / static_cast<double>(c.size() - 1);
    r.value = 1 / (2 * mean_interval);
    return r;
  }
  if (f == "damping") {
    // Extrema of S - final away from final: maxima above it, minima below it.
    const double floor = kRingNoiseRelative * window_scale;
    std::vector<double> excursions;
    for (const Extremum& e : scan.extrema()) {
      const double x = e.v - final_value;
      if (std::abs(x) <= floor) continue;
      if ((e.is_max && x > 0) || (!e.is_max && x < 0)) excursions.push_back(x);
    }
    std::optional<double> second;
    if (!excursions.empty())
      for (std::size_t k = 1; k < excursions.size() && !second; ++k)
        if (sign_of(excursions[k]) == sign_of(excursions[0])) second = excursions[k];
    if (!second) {
      r.value = 1;
      r.note = "does not ring";
      return r;
    }
    // Logarithmic decrement (any vibrations text, e.g. Thomson, Theory of Vibration with
    // Applications; from memory): d = ln(x1/x2), zeta = d / sqrt(4 pi^2 + d^2).
    const double d = std::log(excursions[0] / *second);
    r.value = d / std::sqrt(4 * std::numbers::pi * std::numbers::pi + d * d);
    return r;
  }

  // overshoot, undershoot, rise, settle need a step.
  if (std::abs(step) <= kStepZeroRelative * window_scale)
    return fail(r, label, "step = 0: " + signal_name + " ends the window where it starts (" +
                              with_unit(initial, signal_unit) +
                              "); choose from=/to= around a transition");
  const int dir = sign_of(step);
  const double size = std::abs(step);

  if (f == "overshoot") {
    const auto [best, t_best] = scan.extreme(dir);
    (void)t_best;
    r.value = std::max(0.0, dir * (best - final_value)) / size;
    return r;
  }
  if (f == "undershoot") {
    // The first instant at which S reaches final; then the largest excursion back past it.
    const auto& nodes = scan.nodes();
    double t_reach = b;
    for (std::size_t j = 0; j < nodes.size(); ++j) {
      if (nodes[j].jump) continue;
      const double h = dir * (nodes[j].v - final_value);
      if (h < 0) continue;
      t_reach = nodes[j].t;
      if (h > 0 && j > 0 && nodes[j - 1].smooth_next && !nodes[j - 1].jump) {
        const auto g = [&s, dir, final_value](double x) { return dir * (s.value(x) - final_value); };
        t_reach = brent_zero(g, nodes[j - 1].t, nodes[j].t, dir * (nodes[j - 1].v - final_value),
                             h, kTimeTolerance * (b - a));
      }
      break;
    }
    double worst = 0;
    for (const Node& n : nodes)
      if (!n.jump && n.t >= t_reach) worst = std::max(worst, -dir * (n.v - final_value));
    r.value = worst / size;
    return r;
  }
  if (f == "rise") {
    const double lo = arg_or(call, "lo", 0.1), hi = arg_or(call, "hi", 0.9);
    if (!(lo >= 0 && hi <= 1 && lo < hi))
      return fail(r, label, "lo=" + number(100 * lo) + "% and hi=" + number(100 * hi) +
                                "% must satisfy 0% <= lo < hi <= 100%");
    const double level_lo = initial + lo * step, level_hi = initial + hi * step;
    const auto c_lo = scan.crossings(level_lo);
    if (c_lo.empty())
      return fail(r, label, signal_name + " never crosses " + number(100 * lo) + "% of its step (" +
                                with_unit(level_lo, signal_unit) + ") inside the window");
    const double t_lo = c_lo.front().t;
    for (const Crossing& c : scan.crossings(level_hi))
      if (c.t >= t_lo) {  // equal: an ideal step crosses both levels at its corner
        r.value = c.t - t_lo;
        return r;
      }
    return fail(r, label, signal_name + " never crosses " + number(100 * hi) + "% of its step (" +
                              with_unit(level_hi, signal_unit) + ") after its " + number(100 * lo) +
                              "% crossing inside the window");
  }
  if (f == "settle") {
    const double band = arg_or(call, "band", 0.02);
    if (!(band > 0))
      return fail(r, label, "band=" + number(100 * band) + "% must be above 0%");
    const double width = band * size;
    double last_out = a;
    bool outside_at_start = std::abs(initial - final_value) > width;
    bool found = false;
    for (double level : {final_value + width, final_value - width})
      for (const Crossing& c : scan.crossings(level)) {
        last_out = std::max(last_out, c.t);
        found = true;
      }
    // Outside the band just before `to` (a jump into the band at the very end).
    const auto& nodes = scan.nodes();
    for (auto it = nodes.rbegin(); it != nodes.rend(); ++it) {
      if (it->jump) {
        const auto prev = std::next(it);
        if (prev != nodes.rend() && it->t == b && std::abs(prev->v - final_value) > width)
          last_out = b;
        break;
      }
      if (it->t < b) break;
    }
    if (!found && outside_at_start && last_out == a) last_out = b;
    r.value = last_out - a;
    return r;
  }
  return fail(r, label, "unknown figure '" + f + "'");
}

bool expect_holds(const Expect& expect, double value) {
  if (std::isnan(value)) return false;
  const double v = expect.value;
  switch (expect.op) {
    case CompareOp::Less: return value < v;
    case CompareOp::LessEqual: return value <= v;
    case CompareOp::Greater: return value > v;
    case CompareOp::GreaterEqual: return value >= v;
    case CompareOp::Equal: {
      const double tol = expect.within ? (expect.within_relative ? *expect.within * std::abs(v)
                                                                 : *expect.within)
                                       : 0.0;
      return std::abs(value - v) <= tol;
    }
  }
  return false;
}

}  // namespace ringdown::solver
