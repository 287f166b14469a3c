// Source waveform pieces as small autonomous linear systems.
//
// Between corners every exact waveform is a sum of terms
//     coef * tau^k * exp(rate tau) * cos(omega tau + phase)
// (waveform.hpp). Such a sum is the output of w' = S w, u = H w with S made
// of Jordan blocks (real rate) or real 2x2 rotation-and-decay blocks with
// Jordan coupling (complex pair rate +- i omega); this is the classical
// correspondence between exponential polynomials and linear constant-
// coefficient ODEs (e.g. Kailath, Linear Systems, 1980, ch. 2; from memory).
// Augmenting the network state with w makes the Duhamel integral a plain
// matrix exponential (ARCHITECTURE.md, "Exact propagation", step 3).
//
// Basis used, with s = tau / T0 (T0 a fixed time scale, so that S has
// entries of the size of the rates and 1/T0 rather than 1 next to 1e9):
//   polynomial (rate 0, omega 0): z_k = s^k / k!, k >= 1; z_0 = 1 is the one
//     unit state shared by all sources (w index 0 of the assembled system);
//   real rate r:    z_k = s^k/k! e^{r tau}, k = 0..K;
//   complex r +- iw: (c_k, s_k) = s^k/k! e^{r tau} (cos w tau, sin w tau).
// At the piece's start every z_0 (c_0) is 1 and all others 0.
//
// Not here: `formula` waveforms (no closed form), the cutting of the time
// axis (transient.cpp).
#pragma once

#include <Eigen/Dense>
#include <vector>

#include "parser/waveform.hpp"

namespace ringdown::solver {

// One source's piece: u(tau) = constant * 1 + H w(tau),
// w' = S w + feed * 1 (feed: coupling from the shared unit state), w(0) = w0.
struct SourcePiece {
  double constant = 0;
  Eigen::MatrixXd S;
  Eigen::VectorXd feed;
  Eigen::RowVectorXd H;
  Eigen::VectorXd w0;
};

// Builds the system for a list of terms (tau measured from the piece start).
SourcePiece source_piece(const std::vector<ExpPolyTerm>& terms, double time_scale);

// The assembled input system for all m sources: w = [1; w_1; ...; w_m],
// w' = S w, u = H w (H is m x q), with offsets of each source's block.
struct InputSystem {
  Eigen::MatrixXd S;       // q x q
  Eigen::MatrixXd H;       // m x q
  std::vector<int> offset; // start of source j's block in w
  std::vector<int> size;   // its length
  Eigen::VectorXd w0;      // q: every block at its piece's start (w0(0) = 1)
};
InputSystem assemble_inputs(const std::vector<SourcePiece>& pieces);

}  // namespace ringdown::solver
