// A run turned into numbers and verdicts: the `report` figures, the `expect` verdicts, the
// `rated=` checks, the extra-low-voltage safety screen and the energy balance, all computed on
// the engine's exact trajectory (solver/trajectory.hpp) by solver/figures.hpp.
//
// Two steps, because the engine must know every signal before it runs:
//  1. EvaluationPlan(circuit, streamed): collects the signals the figures, ratings and the
//     safety screen need besides the streamed (recorded) ones; they go to the engine as
//     TransientOptions::trajectory_signals.
//  2. plan.evaluate(trajectory): every figure, verdict and check, as values.
// The safety screen's bleed-down time (how long a charged capacitor stays above the bleed
// level once the supply is removed) needs a second engine run of the disconnected network:
// bleed_down() does it.
//
// Not here: printing (run.cpp, report_writers.cpp), exit codes, sweeps.
#pragma once

#include <cstddef>
#include <optional>
#include <string>
#include <utility>
#include <vector>

#include "parser/circuit.hpp"
#include "parser/diagnostic.hpp"
#include "solver/figures.hpp"
#include "solver/trajectory.hpp"

namespace ringdown::cli {

// The extra-low-voltage band (IEC 61140: 50 V AC rms, 120 V ripple-free DC; values from memory)
// and the level a charged capacitor must bleed below (60 V, the usual touch-safe DC limit for
// stored charge; from memory).
struct SafetyOptions {
  double ac_rms = 50;
  double dc = 120;
  double bleed_level = 60;
  bool accept_risk = false;  // --accept-mains-risk: console text silenced, recorded in JSON
};

struct FigureOutcome {
  std::string name;  // the report's name; for an expect, the figure as written
  const FigureCall* call = nullptr;
  solver::FigureValue value;
  SourcePosition where;
};

struct ExpectOutcome {
  const Expect* expect = nullptr;
  solver::FigureValue value;
  bool pass = false;
};

// One `rated=` check: capacitors by the peak of their capacitance's voltage (C.vc), inductors
// by the peak of their inductance's current (L.il), resistors by their mean power.
struct RatingOutcome {
  std::string part;
  std::string figure;  // "peak(C1.vc)", "power(R1)"
  double value = 0;
  double rating = 0;
  Unit unit;
  std::optional<double> instant;  // where the peak is; none for a mean power
  bool exceeded = false;
  bool ok = true;       // false: the figure could not be computed (error says why)
  std::string error;
  SourcePosition where;
};

// A node or source found above the band.
struct HazardPoint {
  std::string name;     // "drain", "Vin (source)"
  double peak = 0;      // largest |v|, V
  double instant = 0;   // where it is, s
  double ac_rms = 0;    // rms of v - mean(v) over the run, V
  bool over_dc = false; // peak above the DC limit
  bool over_ac = false; // AC rms above the AC limit
};

struct StoredCharge {
  std::string capacitor;
  double voltage = 0;                // |vc| at the end of the run
  double energy = 0;                 // C vc^2 / 2, J
  std::optional<double> bleed_time;  // below bleed_level this long after the supply goes
  std::string note;                  // when there is no bleed time: why
};

struct SafetyReport {
  bool hazardous = false;
  SafetyOptions band;
  std::vector<HazardPoint> points;   // worst first
  std::vector<StoredCharge> stored;  // capacitors above the band at the end
  std::string limitation;            // non-empty when the screen could not look everywhere
};

// The energy bookkeeping of a run, from the element powers on the exact solution:
// what the sources delivered, what resistive parts took, the change of stored energy
// (1/2 C v^2 of each capacitance, 1/2 i^T L i of the inductances with their couplings),
// and the residual delivered - dissipated - stored, relative to the largest term.
struct EnergyBalance {
  bool computed = false;
  std::string skipped;  // why not, when not computed
  double delivered = 0;
  double dissipated = 0;
  double stored_change = 0;
  double residual = 0;  // relative
};

struct Evaluation {
  std::vector<FigureOutcome> reports;
  std::vector<ExpectOutcome> expects;
  std::vector<RatingOutcome> ratings;
  SafetyReport safety;
  EnergyBalance energy;
  Diagnostics diagnostics;  // rated= exceeded (warnings), figures that failed (errors)
  int failed_expects() const;
};

// How much of the evaluation a run needs. Sweeps and trials, which run the same circuit
// hundreds of times, skip the energy balance and screen the mains band on the samples only
// (no exact peak search, no bleed-down run): the caution is still given, for the runs whose
// samples leave the band.
struct EvaluationScope {
  bool energy_balance = true;
  bool exact_safety = true;
};

class EvaluationPlan {
 public:
  // `streamed`: the signals the engine streams (the records), which come first in the
  // trajectory.
  // `scope`: what evaluate() will be asked for; without the energy balance its three
  // signals (a term per element) are not planned, so the engine does not carry them.
  EvaluationPlan(const Circuit& circuit, const std::vector<Signal>& streamed,
                 const SafetyOptions& safety, const EvaluationScope& scope = {});

  // Signals for TransientOptions::trajectory_signals.
  const std::vector<Signal>& extra_signals() const { return extra_; }

  // `states`: the size of the run's state (TransientSummary::states), which sets the cost of
  // the energy balance's quadrature. `scope` must not ask for more than the plan's.
  Evaluation evaluate(const solver::Trajectory& trajectory, std::size_t states,
                      const EvaluationScope& scope = {}) const;

 private:
  std::size_t index_of(const Signal& signal);
  std::size_t part_signal(int part, Quantity quantity);

  struct PlannedFigure {
    std::size_t signal = 0;
    std::optional<std::pair<std::size_t, std::size_t>> power;
  };
  PlannedFigure plan_figure(const FigureCall& call);

  const Circuit& circuit_;
  SafetyOptions safety_;
  std::size_t streamed_count_ = 0;
  std::vector<Signal> streamed_names_;  // copies of the streamed signals (names, units)
  std::vector<Signal> extra_;
  std::vector<PlannedFigure> report_plan_, expect_plan_;
  struct PlannedRating {
    int part = -1;
    FigureCall call;
    PlannedFigure figure;
  };
  std::vector<PlannedRating> rating_plan_;
  struct ScreenedVoltage {
    std::string name;
    std::size_t signal = 0;
  };
  std::vector<ScreenedVoltage> screen_;
  std::string screen_limitation_;
  struct CapacitorSignal {
    int part = -1;
    std::size_t signal = 0;  // C.vc
  };
  std::vector<CapacitorSignal> capacitors_;
  std::vector<CapacitorSignal> inductors_;  // L.il, same shape
  // Energy balance: power delivered by the sources (independent and controlled), power taken
  // by resistors and switches, and the stored energy, each one signal over all elements.
  bool energy_planned_ = false;
  std::size_t delivered_ = 0, dissipated_ = 0, stored_ = 0;
};

// Time for each charged capacitor to fall below band.bleed_level once every independent source
// is disconnected (replaced by an open circuit) and the switches stay as they are at `end`,
// from the state at the end of the run (`final_vc`: per capacitor part, its C.vc at the end;
// inductor currents likewise in `final_il`). Fills StoredCharge::bleed_time or note.
void bleed_down(const Circuit& circuit, std::vector<StoredCharge>& stored,
                const std::vector<std::pair<int, double>>& final_vc,
                const std::vector<std::pair<int, double>>& final_il, double end,
                const SafetyOptions& band);

}  // namespace ringdown::cli
