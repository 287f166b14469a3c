// Dense output of the exact engine: checkpoints of the augmented state and the Trajectory
// that answers any signal, and its derivative, at any instant (ARCHITECTURE.md "Dense
// output"); and the modal view of a configuration that bracket_step() and the engine's
// output-step and run-length warnings read. Internal to solver/ (transient.cpp fills it).
//
// A checkpoint is X = [x_s; w] at an instant t_c with the segment (configuration, input
// structure) in force after t_c. Between checkpoints nothing but propagation happens, so
//   X(t) = expm(M (t - t_c)) X_c   for the last checkpoint t_c <= t,
// and every signal is a program over base = O X (signal_program.hpp): exact at any t, and
// its derivative through base' = O M X and forward-mode rules. Checkpoints are kept at every
// output sample (or every s-th when the memory budget asks) and on both sides of every event
// (corner or switch instant).
//
// Not here: running the circuit (transient.cpp), figures (figures.hpp), the sparse engine.
#pragma once

#include <Eigen/Dense>
#include <complex>
#include <cstddef>
#include <memory>
#include <vector>

#include "solver/propagation.hpp"
#include "solver/signal_program.hpp"
#include "solver/trajectory.hpp"

namespace ringdown::solver {

// Memory the checkpoints of one run may take, bytes (256 MiB: a workstation holds several
// trajectories of that size; common practice, no source). Above it only every s-th sample
// is a checkpoint and the others are reached by propagation, still exact. Tests lower it
// through set_dense_budget_bytes (not a user option).
constexpr double kDenseBudgetBytes = 256.0 * 1024 * 1024;
double dense_budget_bytes();
void set_dense_budget_bytes(double bytes);  // <= 0 restores the default

// Keep every s-th sample so that (samples / s + 2 events) checkpoints of `state_size`
// doubles fit `budget` bytes (events are always kept); s >= 1.
long dense_stride(long samples, long events, long state_size, double budget);

// One (configuration, input structure) met by the run, as the trajectory keeps it.
struct DenseSegment {
  AugmentedSystem sys;  // M and what expm_action / dense_propagator need
  Eigen::MatrixXd O;    // base signals = O X
};

// Checkpoints in time order, filled by the engine while it runs.
class DenseRecorder {
 public:
  // The state just after t (a sample, or the right limit at an event) or, with
  // left_limit, just before the event at t.
  void keep(double t, int segment, const Eigen::VectorXd& X, bool left_limit);
  std::size_t bytes() const;

  std::vector<double> t, data;        // right limits / samples; data: states back to back
  std::vector<int> segment;
  std::vector<std::size_t> offset, size;
  std::vector<double> lt, ldata;      // left limits at events
  std::vector<int> lsegment;
  std::vector<std::size_t> loffset, lsize;
};

struct DenseParts {
  double end = 0, every = 0, instant = 0;
  long samples = 0;  // N: samples at k * every, k = 0 .. N
  std::vector<DenseSegment> segments;
  DenseRecorder checkpoints;
  std::vector<std::vector<Instr>> programs;  // one per trajectory signal
  std::size_t bases = 0;
  double bracket_step = 0;
};
std::shared_ptr<const Trajectory> make_dense_trajectory(DenseParts parts);

// --- Modal view ------------------------------------------------------------------------

// A natural mode of one configuration and how much each output row shows it.
struct SeenMode {
  std::complex<double> pole;       // Im >= 0 (one entry per complex pair)
  std::vector<double> visibility;  // per row of Px, 0..1, relative to the largest mode
};

// Eigen-decomposition of A in energy coordinates z = diag(sqrt|C11_ii|) x: the visibility
// of mode i in row c is |c v_i| * ||w_i|| (right eigenvector v_i, left w_i with w_i v_i = 1,
// both in z), i.e. the largest amplitude the mode gives the signal per unit of stored
// energy at a corner, divided by the largest over the modes for that row. False when the
// eigensolver fails. O(r^3): the engine calls it for small r only.
bool seen_modes(const Eigen::MatrixXd& A, const Eigen::MatrixXd& C11, const Eigen::MatrixXd& Px,
                std::vector<SeenMode>& modes);

// Bendixson's bound (I. Bendixson, Acta Math. 25, 1902): every eigenvalue's |Im| is at most
// the spectral radius of the skew part of D A D^-1 (D = diag(sqrt|C11_ii|)), itself at most
// that part's 1-norm. O(r^2); 0 for an RC network whose C11 is diagonal (A is then
// symmetric in those coordinates).
double oscillation_bound(const Eigen::MatrixXd& A, const Eigen::MatrixXd& C11);

}  // namespace ringdown::solver
