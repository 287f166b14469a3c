// The pole map of `ringdown modes --plot`: every natural-mode pole (both of
// a conjugate pair) in the s-plane, one marker style per switch
// configuration, rays of constant damping ratio (zeta = 0.1, 0.3, 0.5, 0.7)
// as guides, the circuit's title on top. Drawn through gnuplot.hpp
// (terminal, PNG, SVG or PDF).
//
// Axes are in Hz-equivalent, s / (2 pi), so a pole's height is the damped
// frequency of the modes table and its distance from the origin the natural
// frequency; both axes share one SI prefix and, in an image, one scale, so
// the damping rays keep their true angles. When the poles' natural
// frequencies span more than kLinearSpread (as a circuit with a
// nanosecond parasitic and a millisecond magnetizing inductance does), a
// linear plane would crowd all but the fastest pole onto the origin: the
// radius then becomes logarithmic (a pole at angle arg(s), at a distance
// growing by one step per decade of |s|), the angle and so the damping rays
// stay exact, and circles mark the decades. Zero poles sit at the centre.
//
// Not here: computing the modes (solver/modes.hpp), the table (cli/modes.cpp).
#pragma once

#include <complex>
#include <string>
#include <vector>

#include "cli/gnuplot.hpp"

namespace ringdown::cli {

// Largest ratio of natural frequencies drawn on a linear plane.
inline constexpr double kLinearSpread = 100;

struct PoleSet {
  std::string label;                        // "Q1 closed, Dsec open (from 4 us)"
  std::vector<std::complex<double>> poles;  // 1/s, conjugates included
};

struct PoleMapRequest {
  PlotTarget target;
  std::string title;  // the circuit's title (or file name)
  std::vector<PoleSet> sets;
};

// True when the map's radius is logarithmic (see above): the nonzero poles'
// magnitudes span more than kLinearSpread.
bool logarithmic_radius(const std::vector<PoleSet>& sets);

// Draws the map; false with `error` set when gnuplot fails (the target is
// then untouched).
bool draw_pole_map(const PoleMapRequest& request, std::string& error);

}  // namespace ringdown::cli
