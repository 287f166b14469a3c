// Piecewise polynomial fits of formula() waveforms; see formula_fit.hpp for the scheme and
// docs/method.md "Formula sources" for the measurements behind the constants.
//
// Not here: the engine's stepping (transient.cpp) and the wording of diagnostics.
#include "solver/formula_fit.hpp"

#include <algorithm>
#include <array>
#include <cmath>
#include <cstdint>
#include <numbers>
#include <stdexcept>

namespace ringdown::solver {

namespace {

constexpr double kPi = std::numbers::pi;
constexpr int kMaxLow = 4;                  // the first degree n, at most
constexpr int kMaxBasis = 2 * kMaxLow + 1;  // coefficients of the raised fit (2n)
// Halving a piece shrinks its degree-n estimate by 2^(n+1) where the formula is smooth, by
// about 2 at a kink, not at all at a jump, at rounding noise, or while the piece is still
// far too long for the formula (many oscillations in it). A piece stops being halved when
// its estimate fell by less than kStallProgress over the last kStallLevels halvings and
// either its sibling clearly converges (below kNonSmoothRatio of their parent's estimate:
// the trouble is local, a jump) or its estimate is below kNoiseRange of the size of its
// values (their range, or their magnitude if larger: rounding noise). Two children that both
// stall with large errors are an unresolved stretch and are halved on; a kink falls by about
// 1/8 over three halvings and goes on too. A jump is then located to every/2^kStallLevels, and
// noise costs about 2^kStallLevels pieces per step instead of running to the depth cap. Common
// practice in adaptive quadrature, no source.
constexpr int kStallLevels = 3;
constexpr double kStallProgress = 0.5;
constexpr double kNoiseRange = 1e-3;
// A child whose estimate fell by less than this ratio is not in the smooth regime (a kink
// or a jump inside): the check points may then miss the largest error, so the fit kept is
// also compared with the formula at kDenseChecks more points, and the estimate gets a
// safety factor (measured with bench/formula_bench fit: at a kink and at a jump the dense
// estimate is within 20 % of the truth on 64 points per piece).
constexpr double kNonSmoothRatio = 0.25;
constexpr int kDenseChecks = 16;
constexpr double kNonSmoothSafety = 1.25;
// A pole: the pieces around it stall like a jump's, but |f| grows without bound there. The
// stalled pieces with the largest estimates (kPoleProbes of them) are probed: kProbePoints
// points across the piece, then across the neighbourhood of the largest |f| (1/8 of the
// width), and so on; |f| growing by kPoleGrowth or more at each of the last kPoleLevels
// zooms marks the formula as unbounded there (1/(t - t0) grows 8x per zoom, 1/sqrt 2.8x;
// a jump, a resolved narrow pulse or noise stops growing at once; log grows by less).
constexpr int kPoleProbes = 4;
constexpr int kProbePoints = 16;
constexpr int kProbeZooms = 12;
constexpr int kPoleLevels = 4;
constexpr double kPoleGrowth = 2.0;
// No piece shorter than this many units of the engine's time resolution: its length must
// stay well resolved by the step-length cache and its knots distinct events.
constexpr double kMinPieceResolutions = 1024;
// Gate crossings: points of the formula per fitted piece where the sign of f - level is
// looked at (the pieces already follow the formula's detail: tolerance-level fits).
constexpr int kCrossingSamplesPerPiece = 8;

// s in [0, 1] at the Chebyshev-Lobatto points of degree m: (1 - cos(i pi/m))/2.
double lobatto(int i, int m) {
  if (i == 0) return 0.0;
  if (i == m) return 1.0;
  if (2 * i == m) return 0.5;
  return (1 - std::cos(kPi * i / m)) / 2;
}

// Inverse of the Vandermonde rows s_i^k (i, k = 1..m), in long double by Gauss-Jordan with
// partial pivoting (m <= 8: the table is exact to double rounding). a_k = sum_i W(k,i)
// (v_i - v_0) then interpolates v at s_0 = 0 (a_0 = v_0) and s_1..s_m.
using Table = std::array<std::array<double, kMaxBasis>, kMaxBasis>;
Table inverse_vandermonde(const double* s, int m) {
  long double a[kMaxBasis][2 * kMaxBasis] = {};
  for (int i = 0; i < m; ++i) {
    long double p = 1;
    for (int k = 0; k < m; ++k) {
      p *= static_cast<long double>(s[i]);
      a[i][k] = p;
    }
    a[i][m + i] = 1;
  }
  for (int c = 0; c < m; ++c) {
    int best = c;
    for (int i = c + 1; i < m; ++i)
      if (std::fabs(a[i][c]) > std::fabs(a[best][c])) best = i;
    for (int k = 0; k < 2 * m; ++k) std::swap(a[c][k], a[best][k]);
    const long double d = a[c][c];
    for (int k = 0; k < 2 * m; ++k) a[c][k] /= d;
    for (int i = 0; i < m; ++i) {
      if (i == c) continue;
      const long double f = a[i][c];
      for (int k = 0; k < 2 * m; ++k) a[i][k] -= f * a[c][k];
    }
  }
  Table w{};
  for (int k = 0; k < m; ++k)
    for (int i = 0; i < m; ++i)
      w[static_cast<std::size_t>(k)][static_cast<std::size_t>(i)] =
          static_cast<double>(a[k][m + i]);
  return w;
}

// The nested pair of rules of degree n and 2n on [0, 1]. point[i] are the Lobatto points of
// degree 2n: the even ones are the nodes of degree n and the odd ones its check points;
// check[j] (the odd Lobatto points of degree 4n) check the degree-2n fit. For odd n the
// degree-n node polynomial, sin(theta) sin(n theta) with s = (1 - cos theta)/2, is largest
// at s = 1/2, a check point, so the estimate is asymptotically the maximum error; for 2n
// the largest check sees 0.999 of it (Trefethen, Approximation Theory and Approximation
// Practice, 2013, ch. 11: f - p = f[s_0..s_n, s] prod (s - s_i); from memory).
struct Rule {
  int n = 0;
  std::array<double, kMaxBasis> point{};
  std::array<double, 2 * kMaxLow> check{};
  Table low{};   // from point[2], point[4], ..., point[2n]
  Table high{};  // from point[1..2n]
};

Rule make_rule(int n) {
  Rule r;
  r.n = n;
  for (int i = 0; i <= 2 * n; ++i) r.point[static_cast<std::size_t>(i)] = lobatto(i, 2 * n);
  for (int j = 0; j < 2 * n; ++j) r.check[static_cast<std::size_t>(j)] = lobatto(2 * j + 1, 4 * n);
  double s[kMaxBasis];
  for (int k = 1; k <= n; ++k) s[k - 1] = r.point[static_cast<std::size_t>(2 * k)];
  r.low = inverse_vandermonde(s, n);
  for (int i = 1; i <= 2 * n; ++i) s[i - 1] = r.point[static_cast<std::size_t>(i)];
  r.high = inverse_vandermonde(s, 2 * n);
  return r;
}

const Rule& rule(int n) {
  static const std::array<Rule, kMaxLow + 1> rules = [] {
    std::array<Rule, kMaxLow + 1> out{};
    for (int k = 1; k <= kMaxLow; ++k) out[static_cast<std::size_t>(k)] = make_rule(k);
    return out;
  }();
  return rules[static_cast<std::size_t>(n)];
}

double horner(const double* a, int n, double s) {
  double p = a[n];
  for (int k = n - 1; k >= 0; --k) p = p * s + a[k];
  return p;
}

// Coefficients of p(s0 + s') in s' (a Taylor shift by repeated synthetic division).
void shift(double* a, int n, double s0) {
  if (s0 == 0) return;
  for (int j = 0; j < n; ++j)
    for (int k = n - 1; k >= j; --k) a[k] += s0 * a[k + 1];
}

struct Work {
  double a = 0, b = 0;
  double va = 0, vb = 0;  // f at a (from the right) and at b (from the left)
  double vmid = 0;        // f at the midpoint (a point of every fit)
  double est_low = 0;     // the degree-n estimate (halving ratios are taken on it)
  double est = 0;         // the estimate of the fit kept, with its safety factor
  double scale = 0;       // the values' size at the fit's points: max(range, magnitude)
  std::array<double, kMaxBasis> coef{};          // in s = (t - a)/(b - a), zero-padded
  std::array<double, kStallLevels> ancestors{};  // est_low of the parent, grandparent, ...
  std::uint8_t depth = 0;
  bool stalled = false;  // halving stopped helping (see kStallLevels)
};

class Fitter {
 public:
  Fitter(const Waveform& f, const FormulaFitOptions& o, FormulaFitResult& out)
      : f_(f), o_(o), out_(out), rule_(rule(o.degree)) {}

  // f at t; false (and the result marked) when it is not finite.
  bool eval(double t, double& v) {
    v = f_.value(t);
    ++out_.evaluations;
    if (!std::isfinite(v)) {
      if (out_.finite || t < out_.bad_at) {
        out_.finite = false;
        out_.bad_at = t;
        out_.bad_value = v;
      }
      return false;
    }
    out_.peak = std::max(out_.peak, std::fabs(v));
    return true;
  }

  // Fits w on [a, b] (va, vb set): degree n, raised to 2n on the same points plus 2n checks
  // when the estimate exceeds the target. `parent_low`: the parent's degree-n estimate
  // (negative at level 0). False on a non-finite value.
  bool fit(Work& w, double parent_low) {
    const Rule& r = rule_;
    const int n = r.n;
    const double h = w.b - w.a;
    std::array<double, kMaxBasis> v{};
    v[0] = w.va;
    v[static_cast<std::size_t>(2 * n)] = w.vb;
    for (int i = 1; i < 2 * n; ++i)
      if (!eval(w.a + r.point[static_cast<std::size_t>(i)] * h, v[static_cast<std::size_t>(i)]))
        return false;
    w.vmid = v[static_cast<std::size_t>(n)];
    std::array<double, kMaxBasis> c{};
    c[0] = v[0];
    for (int k = 1; k <= n; ++k) {
      double sum = 0;
      for (int i = 1; i <= n; ++i)
        sum += r.low[static_cast<std::size_t>(k - 1)][static_cast<std::size_t>(i - 1)] *
               (v[static_cast<std::size_t>(2 * i)] - v[0]);
      c[static_cast<std::size_t>(k)] = sum;
    }
    double low = 0;
    for (int i = 1; i < 2 * n; i += 2)
      low = std::max(low, std::fabs(v[static_cast<std::size_t>(i)] -
                                    horner(c.data(), n, r.point[static_cast<std::size_t>(i)])));
    w.est_low = low;
    const auto [lo, hi] = std::minmax_element(v.begin(), v.begin() + 2 * n + 1);
    w.scale = std::max(*hi - *lo, std::max(std::fabs(*lo), std::fabs(*hi)));
    const bool smooth = parent_low < 0 || low <= kNonSmoothRatio * parent_low;
    const double safety = smooth ? 1.0 : kNonSmoothSafety;
    w.coef = c;
    int degree = n;
    double raw = low;
    if (o_.raise && safety * low > target()) {
      // Raised: degree 2n through all 2n + 1 points, checked in between.
      std::array<double, kMaxBasis> c2{};
      c2[0] = v[0];
      for (int k = 1; k <= 2 * n; ++k) {
        double sum = 0;
        for (int i = 1; i <= 2 * n; ++i)
          sum += r.high[static_cast<std::size_t>(k - 1)][static_cast<std::size_t>(i - 1)] *
                 (v[static_cast<std::size_t>(i)] - v[0]);
        c2[static_cast<std::size_t>(k)] = sum;
      }
      double high = 0;
      for (int j = 0; j < 2 * n; ++j) {
        const double s = r.check[static_cast<std::size_t>(j)];
        double fx;
        if (!eval(w.a + s * h, fx)) return false;
        high = std::max(high, std::fabs(fx - horner(c2.data(), 2 * n, s)));
      }
      // Keep the better (at a kink the higher degree can be worse).
      if (high < low) {
        w.coef = c2;
        degree = 2 * n;
        raw = high;
      }
    }
    if (!smooth) {
      for (int k = 0; k < kDenseChecks; ++k) {
        const double s = (k + 0.5) / kDenseChecks;
        double fx;
        if (!eval(w.a + s * h, fx)) return false;
        raw = std::max(raw, std::fabs(fx - horner(w.coef.data(), degree, s)));
      }
    }
    w.est = safety * raw;
    return true;
  }

  // Splits `parent` at its midpoint; false on a non-finite value.
  bool split(const Work& parent, Work& left, Work& right) {
    const double m = parent.a + 0.5 * (parent.b - parent.a);
    for (Work* c : {&left, &right}) {
      *c = Work{};
      c->depth = static_cast<std::uint8_t>(parent.depth + 1);
      c->ancestors[0] = parent.est_low;
      for (int k = 1; k < kStallLevels; ++k)
        c->ancestors[static_cast<std::size_t>(k)] =
            parent.ancestors[static_cast<std::size_t>(k - 1)];
    }
    left.a = parent.a;
    left.b = m;
    left.va = parent.va;
    left.vb = parent.vmid;
    right.a = m;
    right.b = parent.b;
    right.va = parent.vmid;
    right.vb = parent.vb;
    if (!fit(left, parent.est_low) || !fit(right, parent.est_low)) return false;
    // A sibling that clearly converges (smooth regime) makes the trouble local.
    const bool settled_l = left.est_low <= kNonSmoothRatio * parent.est_low;
    const bool settled_r = right.est_low <= kNonSmoothRatio * parent.est_low;
    for (Work* c : {&left, &right}) {
      const bool local = c == &left ? settled_r : settled_l;
      const double earlier = c->ancestors[kStallLevels - 1];
      c->stalled = c->depth >= kStallLevels && c->est_low > kStallProgress * earlier &&
                   (local || c->est_low <= kNoiseRange * c->scale);
    }
    return true;
  }

  // Zooms in on the largest |f| in [a, b] (see kPoleProbes); true when it grows like a
  // pole's, with the instant and the last magnitude seen. False also on a non-finite value
  // (then recorded by eval).
  bool probe_pole(double a, double b, double& at, double& magnitude) {
    double lo = a, hi = b, previous = 0;
    int growing = 0;
    for (int zoom = 0; zoom < kProbeZooms; ++zoom) {
      const double width = hi - lo;
      if (!(width > 64 * std::numeric_limits<double>::epsilon() * std::fabs(hi))) break;
      double best = -1, best_t = lo;
      int best_j = 0;
      for (int j = 0; j < kProbePoints; ++j) {
        const double t = lo + (j + 0.5) / kProbePoints * width;
        double v;
        if (!eval(t, v)) return false;
        if (std::fabs(v) > best) {
          best = std::fabs(v);
          best_t = t;
          best_j = j;
        }
      }
      if (zoom > 0) growing = best >= kPoleGrowth * previous ? growing + 1 : 0;
      previous = best;
      at = best_t;
      magnitude = best;
      const double step = width / kProbePoints;
      lo = std::max(lo, lo + (best_j - 0.5) * step);
      hi = std::min(hi, lo + 2 * step);
    }
    return growing >= kPoleLevels;
  }

  double target() const { return o_.tolerance * out_.peak; }

 private:
  const Waveform& f_;
  const FormulaFitOptions& o_;
  FormulaFitResult& out_;
  const Rule& rule_;
};

}  // namespace

FormulaFitResult fit_formula(const WaveformPtr& formula, const FormulaFitOptions& o) {
  FormulaFitResult out;
  if (!formula || !(o.every > 0) || !(o.t_end > 0))
    throw std::invalid_argument("fit_formula: bad options");
  if (o.degree < 1 || o.degree > kMaxLow)
    throw std::invalid_argument("fit_formula: degree out of range");
  const int basis_degree = o.raise ? 2 * o.degree : o.degree;
  Fitter fitter(*formula, o, out);

  // Level-0 knots: the output grid and the formula's own corners (exact parts of a sum).
  const auto steps = static_cast<long>(std::llround(o.t_end / o.every));
  std::vector<double> corners = formula->corners(o.t_end);
  std::vector<std::pair<double, bool>> knots;  // (t, a corner of f: it may jump there)
  knots.reserve(static_cast<std::size_t>(steps) + 1 + corners.size());
  std::size_t ci = 0;
  for (long k = 0; k <= steps; ++k) {
    const double t = static_cast<double>(k) * o.every;
    // Corners before this grid instant (one within resolution of the last knot marks it).
    for (; ci < corners.size() && corners[ci] < t - o.resolution; ++ci) {
      if (knots.empty() || corners[ci] > knots.back().first + o.resolution)
        knots.emplace_back(corners[ci], true);
      else
        knots.back().second = true;
    }
    // Corners within resolution of the grid instant: the grid instant wins.
    bool corner = false;
    for (; ci < corners.size() && corners[ci] <= t + o.resolution; ++ci) corner = true;
    knots.emplace_back(t, corner);
  }

  // The knot values first (so the target starts from a fair peak): at a corner of f the
  // left limit for the piece before and the value from the right for the piece after.
  const std::size_t n_knots = knots.size();
  std::vector<double> v_left(n_knots), v_right(n_knots);
  for (std::size_t i = 0; i < n_knots; ++i) {
    const double t = knots[i].first;
    if (!fitter.eval(t, v_right[i])) return out;
    v_left[i] = v_right[i];
    if (knots[i].second && i > 0 &&
        !fitter.eval(std::nextafter(t, -std::numeric_limits<double>::infinity()), v_left[i]))
      return out;
  }

  // Accepted pieces go straight to the result (in time order unless refinement happened);
  // only the pieces over the target are kept as Work for the next level.
  std::vector<double> starts;
  std::vector<double> coefficients;
  const auto stride = static_cast<std::size_t>(basis_degree + 1);
  starts.reserve(n_knots);
  coefficients.reserve((n_knots - 1) * stride);
  double worst = 0;
  struct Stalled {
    double a, b, est;
  };
  std::vector<Stalled> stalled;  // the kPoleProbes largest estimates among stalled pieces
  const auto accept = [&](const Work& w) {
    if (w.stalled) {
      stalled.push_back({w.a, w.b, w.est});
      std::sort(stalled.begin(), stalled.end(),
                [](const Stalled& x, const Stalled& y) { return x.est > y.est; });
      if (stalled.size() > static_cast<std::size_t>(kPoleProbes)) stalled.pop_back();
    }
    starts.push_back(w.a);
    coefficients.insert(coefficients.end(), w.coef.begin(),
                        w.coef.begin() + static_cast<std::ptrdiff_t>(stride));
    if (w.est > worst) {
      worst = w.est;
      out.worst_at = w.a;
    }
  };
  std::vector<Work> active, next;
  for (std::size_t i = 0; i + 1 < n_knots; ++i) {
    Work w;
    w.a = knots[i].first;
    w.b = knots[i + 1].first;
    w.va = v_right[i];
    w.vb = v_left[i + 1];
    if (!fitter.fit(w, -1)) return out;
    if (w.est <= fitter.target())
      accept(w);
    else
      active.push_back(w);
  }
  // Refinement, level by level, so the whole run is refined evenly if the budget ends it.
  const double min_length = kMinPieceResolutions * o.resolution;
  bool refined = false;
  while (!active.empty()) {
    const double target = fitter.target();
    std::size_t splits = 0;
    for (const Work& w : active)
      if (w.est > target && w.depth < o.max_depth && !w.stalled && w.b - w.a >= 2 * min_length)
        ++splits;
    if (splits > 0 && starts.size() + active.size() + splits > o.max_pieces) {
      out.budget_reached = true;
      splits = 0;
    }
    if (splits == 0) {
      for (const Work& w : active) accept(w);
      break;
    }
    refined = true;
    next.clear();
    for (const Work& w : active) {
      if (!(w.est > target && w.depth < o.max_depth && !w.stalled && w.b - w.a >= 2 * min_length)) {
        accept(w);
        continue;
      }
      Work left, right;
      if (!fitter.split(w, left, right)) return out;
      for (const Work* c : {&left, &right}) {
        if (c->est <= fitter.target())
          accept(*c);
        else
          next.push_back(*c);
      }
    }
    active.swap(next);
  }

  for (const Stalled& p : stalled) {
    if (!(p.est > fitter.target())) continue;
    double at = 0, magnitude = 0;
    const bool pole = fitter.probe_pole(p.a, p.b, at, magnitude);
    if (!out.finite) return out;
    if (pole) {
      out.unbounded = true;
      out.unbounded_at = at;
      out.unbounded_value = magnitude;
      return out;
    }
  }

  std::vector<double> knot_times;
  knot_times.reserve(starts.size() + 1);
  if (refined && !std::is_sorted(starts.begin(), starts.end())) {
    std::vector<std::size_t> order(starts.size());
    for (std::size_t i = 0; i < order.size(); ++i) order[i] = i;
    std::sort(order.begin(), order.end(),
              [&](std::size_t x, std::size_t y) { return starts[x] < starts[y]; });
    std::vector<double> sorted(coefficients.size());
    for (std::size_t i = 0; i < order.size(); ++i) {
      knot_times.push_back(starts[order[i]]);
      std::copy_n(coefficients.begin() + static_cast<std::ptrdiff_t>(order[i] * stride), stride,
                  sorted.begin() + static_cast<std::ptrdiff_t>(i * stride));
    }
    coefficients.swap(sorted);
  } else {
    knot_times = std::move(starts);
  }
  knot_times.push_back(knots.back().first);
  out.pieces = knot_times.size() - 1;
  out.error = out.peak > 0 ? worst / out.peak : 0.0;
  out.waveform = std::make_shared<FittedFormula>(formula, std::move(knot_times),
                                                 std::move(coefficients), basis_degree, o.every);
  return out;
}

// --- FittedFormula -----------------------------------------------------------

FittedFormula::FittedFormula(WaveformPtr formula, std::vector<double> knots,
                             std::vector<double> coefficients, int degree, double every)
    : formula_(std::move(formula)),
      knots_(std::move(knots)),
      coefficients_(std::move(coefficients)),
      degree_(degree),
      every_(every) {
  if (knots_.size() < 2 || coefficients_.size() != (knots_.size() - 1) * stride())
    throw std::invalid_argument("FittedFormula: inconsistent pieces");
}

double FittedFormula::time_scale(std::size_t i) const {
  const double h = knots_[i + 1] - knots_[i];
  if (!(every_ > 0) || !(h > 0) || h > every_ * (1 + 1e-9)) return h;
  const double c = std::ldexp(every_, -static_cast<int>(std::lround(std::log2(every_ / h))));
  const double slack = 8 * std::numeric_limits<double>::epsilon() *
                       std::max(std::fabs(knots_[i]), std::fabs(knots_[i + 1]));
  return std::fabs(c - h) <= slack ? c : h;
}

std::size_t FittedFormula::locate(double t, std::size_t hint) const {
  for (std::size_t i = hint; i < hint + 2 && i + 1 < knots_.size(); ++i)
    if (knots_[i] <= t && t < knots_[i + 1]) return i;
  const auto it = std::upper_bound(knots_.begin(), knots_.end(), t);
  if (it == knots_.begin()) return 0;
  return static_cast<std::size_t>(it - knots_.begin()) - 1;  // pieces() past the last knot
}

double FittedFormula::value(double t) const {
  if (t < knots_.front()) return coefficients(0)[0];
  std::size_t i = locate(t);
  if (i >= pieces()) {
    i = pieces() - 1;
    t = knots_.back();
  }
  const double s = (t - knots_[i]) / (knots_[i + 1] - knots_[i]);
  return horner(coefficients(i), degree_, s);
}

std::vector<double> FittedFormula::corners(double t_end) const {
  std::vector<double> out;
  for (std::size_t i = 1; i < knots_.size() && knots_[i] <= t_end; ++i)
    if (knots_[i] > 0) out.push_back(knots_[i]);
  return out;
}

WaveformPiece FittedFormula::piece(double t_begin) const {
  WaveformPiece p;
  p.begin = t_begin;
  const std::size_t i = locate(t_begin);
  if (i >= pieces()) {
    p.end = std::numeric_limits<double>::infinity();
    p.terms.push_back(ExpPolyTerm{value(knots_.back()), 0, 0, 0, 0});
    return p;
  }
  const double h = knots_[i + 1] - knots_[i];
  std::array<double, kMaxBasis> a{};
  std::copy(coefficients(i), coefficients(i) + stride(), a.begin());
  shift(a.data(), degree_, (std::max(t_begin, knots_[i]) - knots_[i]) / h);
  p.end = knots_[i + 1];
  double scale = 1;  // 1/h^k: coefficients of tau^k
  for (int k = 0; k <= degree_; ++k) {
    if (a[static_cast<std::size_t>(k)] != 0)
      p.terms.push_back(ExpPolyTerm{a[static_cast<std::size_t>(k)] * scale, k, 0, 0, 0});
    scale /= h;
  }
  return p;
}

std::string FittedFormula::describe() const {
  return formula_->describe() + " fitted by " + std::to_string(pieces()) +
         " polynomial pieces of degree " + std::to_string(degree_) + " at most";
}

std::vector<std::pair<double, int>> FittedFormula::crossings(double level, double t_end) const {
  std::vector<std::pair<double, int>> out;
  const auto above = [&](double t) { return formula_->value(t) > level; };
  bool state = above(0.0);
  double previous = 0;
  for (std::size_t i = 0; i + 1 < knots_.size() && knots_[i] < t_end; ++i) {
    const double a = knots_[i];
    const double b = std::min(knots_[i + 1], t_end);
    for (int k = 1; k <= kCrossingSamplesPerPiece; ++k) {
      const double t =
          k == kCrossingSamplesPerPiece ? b : a + (b - a) * k / kCrossingSamplesPerPiece;
      const bool now = above(t);
      if (now != state) {
        // Bisection on the formula down to adjacent doubles.
        double lo = previous, hi = t;
        while (true) {
          const double mid = lo + (hi - lo) / 2;
          if (!(mid > lo && mid < hi)) break;
          (above(mid) == state ? lo : hi) = mid;
        }
        out.emplace_back(hi, now ? 1 : -1);
        state = now;
      }
      previous = t;
    }
  }
  return out;
}

bool fitted_source_piece(const FittedFormula& w, double t, SourcePiece& p, std::size_t* cursor) {
  const int n = w.degree();
  const auto q = static_cast<Eigen::Index>(n + 1);
  const std::size_t i = w.locate(t, cursor ? *cursor : 0);
  if (cursor) *cursor = i;
  std::array<double, kMaxBasis> a{};
  double h;
  if (i >= w.pieces()) {
    // Past the run: hold the last value (the length is kept: S need not change).
    a[0] = w.value(t);
    h = p.S.rows() == q && p.S(0, 1) > 0 ? 1.0 / p.S(0, 1) : w.time_scale(w.pieces() - 1);
  } else {
    h = w.time_scale(i);
    std::copy(w.coefficients(i), w.coefficients(i) + n + 1, a.begin());
    shift(a.data(), n, (std::max(t, w.knot(i)) - w.knot(i)) / (w.knot(i + 1) - w.knot(i)));
  }
  const double inv_h = 1.0 / h;
  bool changed = false;
  if (p.S.rows() != q || p.S(0, 1) != inv_h) {
    p.constant = 0;
    p.S = Eigen::MatrixXd::Zero(q, q);
    for (int k = 0; k < n; ++k) p.S(k, k + 1) = (k + 1) * inv_h;
    p.feed = Eigen::VectorXd::Zero(q);
    p.H = Eigen::RowVectorXd::Zero(q);
    p.H(0) = 1;
    changed = true;
  }
  p.w0.resize(q);
  for (Eigen::Index k = 0; k < q; ++k) p.w0(k) = a[static_cast<std::size_t>(k)];
  return changed;
}

}  // namespace ringdown::solver
