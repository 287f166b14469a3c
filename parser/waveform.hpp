// Source and switch-gate waveforms of NETLIST.md section 5.
//
// Every waveform except `formula` is, between its corners, an exact
// exponential-polynomial: a finite sum of ExpPolyTerm. The solver turns each
// piece into a small linear system w' = S w, u = H w and propagates it exactly
// (ARCHITECTURE.md, "Exact propagation"). This header only describes the
// waveforms; it does not integrate anything.
//
// Conventions (NETLIST.md):
//  - right-continuous: at a jump the new value holds from that instant on;
//  - before t = 0 every waveform holds its value at t = 0 from the left
//    (a step at 0 is still `from` for t < 0);
//  - times in seconds, angles in radians.
#pragma once

#include <functional>
#include <memory>
#include <string>
#include <utility>
#include <vector>

namespace ringdown {

// coef * tau^power * exp(rate * tau) * cos(omega * tau + phase),
// tau = t - (start of the piece). A constant is {c, 0, 0, 0, 0}; a ramp adds
// {slope, 1, 0, 0, 0}; sin(x) is written cos(x - pi/2).
struct ExpPolyTerm {
  double coef = 0;
  int power = 0;
  double rate = 0;
  double omega = 0;
  double phase = 0;
};

// The waveform on [begin, end): value(t) = sum of terms at tau = t - begin.
// end = +infinity when no later corner exists.
struct WaveformPiece {
  double begin = 0;
  double end = 0;
  std::vector<ExpPolyTerm> terms;
};

double evaluate(const WaveformPiece& piece, double t);

class Waveform {
 public:
  virtual ~Waveform() = default;

  // Value at t (right-continuous). For t < 0: the value at 0 from the left.
  virtual double value(double t) const = 0;

  // The left limit at 0 (what the DC operating point uses).
  double value_before_zero() const { return value(-1.0); }

  // Instants in (0, t_end] where the waveform's formula changes (jumps,
  // kinks, start of a sine, each pulse edge...), sorted, without duplicates.
  virtual std::vector<double> corners(double t_end) const = 0;

  // False for `formula`: it has no closed form; value() still works.
  virtual bool is_exact() const { return true; }

  // The exact piece valid from t_begin (>= 0) up to the next corner after
  // t_begin. Terms are in tau = t - t_begin. Precondition: is_exact().
  virtual WaveformPiece piece(double t_begin) const = 0;

  // Human-readable one-line description for `inspect`, with named arguments
  // and SI values, e.g. "step(from=1, to=0, at=10 us, rise=0 s)".
  virtual std::string describe() const = 0;

  // Instants in (0, t_end] where the waveform crosses `level` (used for
  // switch gates at 0.5), in increasing order, with the direction
  // (+1 up, -1 down). A jump across the level counts at the jump instant.
  // The default implementation works piece by piece (bracketing + bisection)
  // and is exact to ~1e-15 relative in time.
  virtual std::vector<std::pair<double, int>> crossings(double level, double t_end) const;
};

using WaveformPtr = std::shared_ptr<const Waveform>;

// --- Factories (arguments already in SI, validated by the parser) ----------
WaveformPtr make_constant(double value);
WaveformPtr make_step(double from, double to, double at, double rise);
struct PulseSpec {
  double low = 0, high = 1;
  double period = 0;  // > 0
  double width = 0;   // high time (already computed from duty if given)
  double rise = 0, fall = 0, start = 0;
  long count = 0;     // 0: forever
};
WaveformPtr make_pulse(const PulseSpec& spec);
// tau <= 0 or infinite: no decay.
WaveformPtr make_sine(double freq, double amp, double mean, double phase, double start,
                      double tau);
WaveformPtr make_approach(double to, double tau, double from, double at);
// Strictly increasing times (checked by the parser).
WaveformPtr make_points(std::vector<std::pair<double, double>> points);
// Same as points, but described as samples("file", ...).
WaveformPtr make_samples(std::vector<std::pair<double, double>> points, std::string file);
WaveformPtr make_sum(std::vector<WaveformPtr> terms);
WaveformPtr make_scaled(double factor, WaveformPtr waveform);
// Non-exact: f(t) evaluated as written; `text` is the expression as written.
WaveformPtr make_formula(std::function<double(double)> f, std::string text);

}  // namespace ringdown
