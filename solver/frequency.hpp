// Frequency analysis (NETLIST.md section 7, `frequency`): the small-signal
// response from one independent source (amplitude 1, every other source
// zeroed, switches in their initial state) to each recorded signal.
//
// It is solved on the MNA descriptor system itself, never on a reduced state
// space, so it needs no index-1 split and serves large sparse circuits later:
//     (j w C + G) X = B e_input,   Y = (Lx + j w Ldx) X + Lu e_input
// (mna/descriptor.hpp: a base signal is y = x_row x + dx_row x' + u_row u, and
// x' becomes j w X). One complex solve per frequency; the solve sits behind
// PencilSolver so a sparse factorisation can replace the dense LU.
//
// Signals must be linear in the unknowns: node voltages, X.v, X.i, C.vc, L.il
// and sums, differences and constant multiples of them. A power (X.p) or a
// product of two signals is not small-signal linear and is rejected with a
// diagnostic naming the signal; an added constant (an offset) has no
// small-signal part and contributes nothing.
//
// Not here: printing, CSV (cli/freq.cpp), the modes analysis, sweeps/trials.
#pragma once

#include <complex>
#include <memory>
#include <optional>
#include <string>
#include <vector>

#include <Eigen/Dense>

#include "mna/descriptor.hpp"
#include "parser/circuit.hpp"
#include "parser/diagnostic.hpp"
#include "solver/transient.hpp"  // Status

namespace ringdown::solver {

// 20 log10(sqrt 2) = 10 log10 2: the "-3 dB" of a half-power point.
inline constexpr double kHalfPowerDb = 3.010299956639812;

// Points from * 10^(k/per_decade), k = 0, 1, ..., up to the last not above
// `to` (NETLIST.md section 7). A point within 1e-9 (relative, in k) of `to`
// counts as not above it, so from=1 to=1M per_decade=10 ends on 1 MHz exactly.
std::vector<double> frequency_points(double from, double to, int per_decade);

// Solves (j w C + G) X = b for one angular frequency. The interface is what a
// sparse factorisation needs to provide as well.
class PencilSolver {
 public:
  virtual ~PencilSolver() = default;
  // False when the pencil is singular at w (a lossless resonance hit exactly,
  // or G singular at w = 0); x is then unspecified.
  virtual bool solve(double omega, const Eigen::VectorXd& b, Eigen::VectorXcd& x) const = 0;
};

// Dense complex LU with partial pivoting (Eigen::PartialPivLU) on the
// equilibrated matrix (powers-of-two row/column scales, state_space.hpp's
// equilibrate), so 1 pF beside 1 S loses nothing to scaling.
std::unique_ptr<PencilSolver> make_dense_pencil_solver(const mna::Descriptor& descriptor);

// The exact response of a set of signals to one input, at any frequency.
class FrequencyResponse {
 public:
  // Analyses the network, stamps it with the initial switch states, and
  // compiles each signal to its linear map. `input_part` is the part index
  // of a voltage or current source. Returns nullopt with diagnostics (status
  // BadInput) when a signal is not linear, the input is not a source, or
  // the topology is rejected.
  static std::optional<FrequencyResponse> build(const Circuit& circuit,
                                                const std::vector<Signal>& signals,
                                                int input_part, bool strict,
                                                Diagnostics& diagnostics);

  std::size_t signals() const { return static_cast<std::size_t>(Lx_.rows()); }
  // H_k(j 2 pi hz) for every signal k; false when the pencil is singular there.
  bool at(double hz, std::vector<std::complex<double>>& h) const;

 private:
  FrequencyResponse() = default;
  std::shared_ptr<const PencilSolver> solver_;
  Eigen::VectorXd b_;       // B e_input
  Eigen::MatrixXd Lx_, Ldx_;
  Eigen::VectorXd Lu_;      // each signal's direct feed-through of the input
};

// Summary figures of one signal's response (docs/frequency.md).
struct FrequencyFigures {
  // dc_gain: 20 log10 |H(0)|, solved at w = 0 on G alone; when G is singular
  // (no DC solution) the response at the lowest point instead, and
  // dc_at_lowest is set. -infinity when the response is zero at DC.
  double dc_gain_db = 0;
  bool dc_at_lowest = false;
  // corner: first frequency in the sweep where the gain falls kHalfPowerDb
  // below dc_gain (interpolated in log f, then bisection on the exact
  // response); empty when the sweep never crosses it or dc_gain is -inf.
  std::optional<double> corner_hz;
  // peak_gain / peak_freq: the largest gain, refined between the sample's
  // neighbours by golden-section search on the exact response.
  double peak_db = 0;
  double peak_hz = 0;
  // phase_at: phase (degrees) at the requested frequency, on the branch of
  // the unwrapped sweep phase nearest to it.
  std::optional<double> phase_at_deg;
};

struct SignalResponse {
  std::string name;
  std::vector<double> db;   // 20 log10 |H| per point (-inf where H = 0)
  std::vector<double> deg;  // unwrapped from the first point, which is in (-180, 180]
  FrequencyFigures figures;
};

struct FrequencyOptions {
  double from = 0, to = 0;          // Hz, 0 < from < to
  int per_decade = 50;
  int input_part = -1;              // part index of the input source
  std::optional<double> phase_at;   // Hz: evaluate phase_at there
  bool strict = false;              // topology warnings become errors
};

struct FrequencyResult {
  Status status = Status::Ok;
  std::vector<double> freq;                 // Hz
  std::vector<SignalResponse> signals;      // in the order given
};

// The whole analysis. Warnings and errors go to `diagnostics`.
FrequencyResult run_frequency(const Circuit& circuit, const std::vector<Signal>& signals,
                              const FrequencyOptions& options, Diagnostics& diagnostics);

// Phase unwrapping: each value moved by a whole number of turns (360) to lie
// within 180 of its predecessor; the first mapped into (-180, 180].
void unwrap_degrees(std::vector<double>& deg);

}  // namespace ringdown::solver
