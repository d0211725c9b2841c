// Scoring stored runs against the simulator's ground truth: does a run's calibrated return loss
// fit the unit it is stored under, and would the unit's TRUE return loss meet the recipe's
// limits. Pure functions of values (no I/O). Thread-safe (no shared state).
#pragma once

#include <optional>
#include <string>
#include <vector>

#include "daemon/core/recipe.hpp"

namespace echoline::soak {

// The limits a unit's truth must meet: the recipe's mask segments and its resonance window, if
// it has one. Plain numbers (limits_of copies them from a loaded recipe), so the truth is scored
// by this file's code and never by the daemon's judging.
struct MaskLimit {
  double start_hz = 0;
  double stop_hz = 0;
  double min_rl_db = 0;
};
struct TruthLimits {
  std::vector<MaskLimit> mask;
  std::optional<double> resonance_min_hz;   // both or neither
  std::optional<double> resonance_max_hz;
};
TruthLimits limits_of(const core::Recipe& recipe);

// One stored point: frequency and the calibrated return loss with its bounds (NaN when absent).
struct StoredPoint {
  double frequency_hz = 0;
  double rl_db = 0;
  double rl_worst_db = 0;
  double rl_best_db = 0;   // +inf when unbounded
};

// Does the unit's true return loss (sampled at the run's frequencies) meet every mask segment,
// and its true resonance the window when there is one? `reason` says which limit it misses.
bool truth_accepts(const std::vector<double>& frequencies_hz, const std::vector<double>& true_rl_db, double true_f0_hz,
                   const TruthLimits& limits, std::string* reason);

// How well a run's calibrated return loss fits a truth curve: RMS difference in dB over the
// points where the truth is at most `max_rl_db` (deeper points are dominated by the bench's
// directivity and noise, so they carry no identity). nullopt when no point qualifies.
std::optional<double> rms_misfit_db(const std::vector<StoredPoint>& run, const std::vector<double>& true_rl_db,
                                    double max_rl_db = 20);

// Fraction of the qualifying points (truth <= max_rl_db) whose true return loss lies outside
// the stored [worst, best] bounds widened by `slack_db`.
double fraction_outside_bounds(const std::vector<StoredPoint>& run, const std::vector<double>& true_rl_db,
                               double slack_db, double max_rl_db = 20);

}  // namespace echoline::soak
