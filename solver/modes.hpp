// Natural modes: eigen-analysis of the reduced state matrix A of each switch
// configuration a circuit's transient run meets (NETLIST.md section 7,
// `modes`; CLI.md `ringdown modes FILE`).
//
// For each configuration: A from the index-1 reduction (state_space.hpp),
// balanced (Parlett & Reinsch 1969), eigenvalues and right eigenvectors by
// Eigen's EigenSolver (Hessenberg + real Schur), left eigenvectors as the
// rows of V^-1; per pole the damped and undamped natural frequency, damping
// ratio, Q and time constant; per mode the participation factors
// (Perez-Arriaga, Verghese & Schweppe 1982) summed from states to the parts
// (capacitors and inductors, hidden esr/esl/dcr/srf parts counted with the
// part the user wrote) they belong to.
//
// Not here: printing (cli/modes.cpp); sweeps and trials (modes are computed
// at the nominal values, after --set overrides); the small-signal frequency
// response (a separate analysis). Configurations are those met by the gate
// waveforms up to the transient's `until`; sources do not change A.
#pragma once

#include <Eigen/Dense>
#include <complex>
#include <string>
#include <vector>

#include "parser/circuit.hpp"
#include "parser/diagnostic.hpp"

namespace ringdown::solver {

struct ModesOptions {
  bool strict = false;  // topology warnings become errors (as for run --strict)
};

// A part's share in one mode: participation factors of its states summed,
// so the shares of one mode sum to 1.
struct Participation {
  int part = -1;     // index into Circuit::parts
  std::string name;  // the part's name, e.g. "L1", "SN1.C1"
  double share = 0;  // 0..1
};

enum class ModeKind {
  Oscillating,  // a complex pair, one row for both poles (listed with Im > 0)
  Real,         // a real pole: a time constant
  Constant,     // a zero pole: a conserved quantity (a capacitor-only cut, an
                // inductor-only loop), neither decays nor grows
};

struct Mode {
  ModeKind kind = ModeKind::Real;
  std::complex<double> pole;  // lambda, 1/s (Im >= 0 for a pair)
  double damped_hz = 0;       // Im(lambda) / (2 pi); 0 for a real pole
  double natural_hz = 0;      // |lambda| / (2 pi)
  double damping_ratio = 0;   // zeta = -Re(lambda) / |lambda|
  double q = 0;               // 1 / (2 zeta); +inf when zeta = 0; oscillating modes only
  double time_constant = 0;   // -1 / Re(lambda), s; +inf when Re(lambda) = 0
  bool growing = false;       // Re(lambda) > 0: an unstable mode
  std::vector<double> state_participation;  // p_ki over the states k, sums to 1
  std::vector<Participation> parts;         // all parts taking part, largest share first
};

struct ConfigurationModes {
  double from = 0;                        // first instant the configuration holds (0: at the start)
  std::vector<bool> closed;               // per switch (Circuit order of the switch elements)
  std::vector<std::string> switch_names;  // the switches' part names, same order
  std::vector<Mode> modes;  // sorted by damped frequency, real poles (slowest first) before
  double eigenvector_condition = 0;  // estimate of cond(V): large means a near-defective A and
                                     // participation factors that are not well determined
};

struct ModesResult {
  bool ok = false;
  bool numerical_failure = false;  // true: exit 3; false with !ok: bad input, exit 2
  std::vector<ConfigurationModes> configurations;  // in the order the run meets them
  std::vector<std::string> state_names;            // "C1.vc", "L1.il" per state (shared by all)
};

// Eigen-analysis of every configuration the run meets. Errors and warnings
// go to `diagnostics`.
ModesResult compute_modes(const Circuit& circuit, const ModesOptions& options,
                          Diagnostics& diagnostics);

// Eigen-analysis of one state matrix A (exposed for tests): modes with
// state participation filled, `parts` empty. `ok` false if the eigensolver
// did not converge.
struct MatrixModes {
  bool ok = false;
  std::vector<Mode> modes;
  double eigenvector_condition = 0;
};
MatrixModes modes_of_matrix(const Eigen::MatrixXd& A);

// Parlett & Reinsch balancing: D (powers of two) such that D^-1 A D has
// rows and columns of comparable norm; returns the diagonal of D.
Eigen::VectorXd balance(Eigen::MatrixXd& A);

}  // namespace ringdown::solver
