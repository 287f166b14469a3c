// formula() waveforms made exact for one run: a piecewise polynomial fitted to the formula
// with an estimated error, which the exact engine then propagates like any other
// exponential-polynomial source (ARCHITECTURE.md "Exact propagation", item 5; NETLIST.md
// section 5; docs/method.md "Formula sources").
//
// Knots are the output grid t = k*every, the corners of any exact part summed with the
// formula, and binary subdivisions of a grid step (every/2^j), so knot spacings repeat and
// the engine's propagator cache by step length keeps working. On each piece the polynomial
// interpolates the formula at the Chebyshev-Lobatto points (the piece's ends among them, so
// the fit is continuous wherever the formula is); its error is estimated from the formula
// at the Chebyshev points of twice the degree in between. A piece whose estimate exceeds
// tolerance * peak(|f|) is refitted with twice the degree through the same points, then
// halved, until the estimate passes, the depth cap is met, or halving stops helping (a
// jump, rounding noise); the achieved estimate is reported honestly either way. A value
// that is NaN or infinite, or a pole (|f| growing without bound between the points), ends
// the fit with no waveform and the instant.
//
// Not here: the engine's use of the pieces (transient.cpp), diagnostics (the caller words
// them from the result), parsing the expression (parser/load.cpp).
#pragma once

#include <cstddef>
#include <limits>
#include <memory>
#include <string>
#include <utility>
#include <vector>

#include "parser/waveform.hpp"
#include "solver/source_model.hpp"

namespace ringdown::solver {

struct FormulaFitOptions {
  double every = 0;         // output step H, s (> 0)
  double t_end = 0;         // the last output instant (a whole number of steps)
  double tolerance = 1e-9;  // target of the estimate, relative to the peak of |f|
  double resolution = 0;    // instants closer than this are one (the engine's resolution)
  // The degree n of a first fit (1..4; odd: the largest error of the interpolant then sits
  // at a check point). With `raise`, a piece over the target is refitted with degree 2n
  // through the same points (its checks are the only new evaluations) before it is halved;
  // the engine's source state then carries 2n + 1 coefficients.
  int degree = 3;
  bool raise = true;
  int max_depth = 40;                 // halvings of an output step at most
  std::size_t max_pieces = 1u << 21;  // all pieces of one formula at most
};

class FittedFormula;

struct FormulaFitResult {
  std::shared_ptr<const FittedFormula> waveform;  // empty when not finite or unbounded
  double error = 0;     // the largest estimate relative to the peak (0 if the peak is 0)
  double worst_at = 0;  // start of the piece with that estimate, s
  double peak = 0;      // largest |f| seen
  std::size_t pieces = 0;
  std::size_t evaluations = 0;
  bool budget_reached = false;  // max_pieces stopped the refinement
  bool finite = true;           // false: f(bad_at) = bad_value is NaN or infinite
  double bad_at = 0;
  double bad_value = 0;
  // A pole: |f| kept growing while zooming in on unbounded_at (the largest magnitude seen
  // there is unbounded_value); no fit is returned (waveform empty).
  bool unbounded = false;
  double unbounded_at = 0;
  double unbounded_value = 0;
};

// Fits `formula` (any waveform; value() and corners() are used) on [0, t_end].
FormulaFitResult fit_formula(const WaveformPtr& formula, const FormulaFitOptions& options);

// The fitted waveform: exact (its pieces are polynomials) and equal to the fit everywhere,
// so value(), piece() and the DC operating point agree. Before 0 it holds f(0); after the
// last knot it holds the last knot's value. crossings() is the exception: a switch gate's
// instants are found on the formula itself, bracketed at the fit's knots and sub-points
// (which follow the formula's detail) and bisected.
class FittedFormula final : public Waveform {
 public:
  // `every`: the output step the knots subdivide (0: none), for time_scale().
  FittedFormula(WaveformPtr formula, std::vector<double> knots, std::vector<double> coefficients,
                int degree, double every = 0);

  double value(double t) const override;
  std::vector<double> corners(double t_end) const override;
  WaveformPiece piece(double t_begin) const override;
  std::string describe() const override;
  std::vector<std::pair<double, int>> crossings(double level, double t_end) const override;

  // For the engine's source model (fitted_source_piece).
  int degree() const { return degree_; }
  std::size_t pieces() const { return knots_.size() - 1; }
  // The piece holding at t: knots_[i] <= t < knots_[i+1]; pieces() past the last knot.
  // `hint`: a guess (the previous answer: the engine walks forward), checked first.
  std::size_t locate(double t, std::size_t hint = 0) const;
  double knot(std::size_t i) const { return knots_[i]; }
  // degree()+1 coefficients of piece i in s = (t - knot(i)) / (knot(i+1) - knot(i)).
  const double* coefficients(std::size_t i) const { return &coefficients_[i * stride()]; }
  const Waveform& formula() const { return *formula_; }
  // The length piece i stands for in the source system: every/2^j when its length is that to
  // within the rounding of its knots (knot spacings of one depth differ in the last bits far
  // into a run; one value keeps them one input structure and one cached propagator), else
  // its length.
  double time_scale(std::size_t i) const;

 private:
  std::size_t stride() const { return static_cast<std::size_t>(degree_) + 1; }
  WaveformPtr formula_;
  std::vector<double> knots_;
  std::vector<double> coefficients_;
  int degree_;
  double every_;
};

// The source system of the fitted piece holding at t, in the basis
//     y_k(tau) = h^k p^(k)(tau) / k!,  k = 0..degree,   u = y_0,
// with h the piece's length (its time_scale()): S (y_k' = (k+1)/h y_{k+1}) and H depend on h only,
// and the coefficients enter through w0 (y_k(0) = the Taylor coefficients at t in s = tau/h), so
// all pieces of one length share one propagator. Scaling by the piece's own length keeps every
// entry of S h and of w0 of order one however deep the subdivision.
// `piece` is updated in place; returns true when S changed (a new length), false when only
// w0 did. `cursor` (optional) carries the piece index from one call to the next.
bool fitted_source_piece(const FittedFormula& waveform, double t, SourcePiece& piece,
                         std::size_t* cursor = nullptr);

}  // namespace ringdown::solver
