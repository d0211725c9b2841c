// The resonance-window prediction against what re-judging shows: every final run judged again
// OFFLINE with a window recipe (its raw readings and its calibration read from a copy of the
// store), the recipe's nominal unit filled in from the reference units (the passing runs), the
// centring prediction made from the calibration's error radius, and both inconclusive shares
// compared. Reads the store copy; one driving thread. reference_units and error_radius are pure.
#pragma once

#include <map>
#include <optional>
#include <string>
#include <vector>

#include "daemon/core/recipe.hpp"
#include "daemon/core/recipe_check.hpp"
#include "daemon/store/run_store.hpp"
#include "tests/score/unit_record.hpp"

namespace echoline::score {

// What an engineer would take from a handful of known-good units: the passing final runs'
// median bandwidth and depth, and the mean and standard deviation of their resonance.
struct ReferenceUnits {
  int count = 0;                              // passing runs used
  std::optional<double> bandwidth_median_hz;  // over the runs that have a bandwidth
  std::optional<double> depth_median_db;
  std::optional<double> resonance_mean_hz;
  std::optional<double> resonance_sd_hz;      // sample standard deviation (n - 1), n >= 2
};
ReferenceUnits reference_units(const std::vector<UnitRecord>& units);

// Sets the window recipe's nominal unit from the reference: bandwidth (and no q), depth when the
// recipe has that field, resonance spread and centre. Returns whether the depth was applied.
bool apply_reference(core::Recipe& window, const ReferenceUnits& reference);

// Median over the band (the window recipe's mask span, else its resonance window) of the
// calibration's directivity bound plus coverage_factor x its connection term, in |Γ|.
// nullopt when the calibration has no budget point in the band.
std::optional<double> error_radius(const core::CalibrationRecord& cal, const core::Recipe& window);

struct WindowFigures {
  std::string recipe_name;
  ReferenceUnits reference;
  bool depth_applied = false;
  int judged = 0;                          // final non-aborted runs re-judged
  std::map<std::string, int> verdicts;     // re-judged verdicts
  int inconclusive = 0;
  int inconclusive_for_window = 0;         // ... whose reason involves the resonance window
  std::map<std::string, int> inconclusive_reasons;   // first 60 characters
  std::string calibration_id;              // the calibration that judged most runs (its radius predicts)
  int calibrations_used = 0;
  double error_radius = 0;
  bool predicted = false;                  // predict_centring gave a figure
  double predicted_fraction = 0;
  double half_width_hz = 0;                // predicted half-width of the resonance interval
  std::string basis;
  // What re-judging showed: the half-width of the resonance interval, where it is closed on both
  // sides, and which bound decided it.
  double observed_half_width_median_hz = 0;
  int intervals_closed = 0;
  int intervals_shift_bound = 0;
  int intervals_rigorous = 0;
  int intervals_pair = 0;          // decided by the offset pair's sum (MEASUREMENT.md §12.1)
  // The error radius the daemon's shift bound works with on a run: the largest per-point radius
  // (uncertainty.hpp, gamma_error_radius) over the points within 6 dB of the dip; median over
  // the runs whose interval the shift bound decided.
  double observed_error_radius_median = 0;
  // The dip fit (daemon/core/dip_fit.hpp) on the re-judged runs: how often it decided, the
  // median half-width of the reported intervals where it did, the median rigorous half-width
  // over the same runs, why it was refused, and the units whose true resonance (simulator truth)
  // lies outside the interval reported (open sides reach beyond the sweep). Also the
  // inconclusive share with the fit switched off, for comparison.
  int fit_used = 0;
  std::map<std::string, int> fit_refused;   // first 60 characters of the reason
  double fit_half_width_median_hz = 0;      // over runs where the fit decided
  double rigorous_half_width_median_hz = 0; // over the same runs
  double rigorous_half_width_all_median_hz = 0;  // over every run with a closed rigorous interval
  int truth_checked = 0;
  std::vector<std::string> truth_outside;   // "serial: truth f MHz outside [lo, hi]"
  int inconclusive_without_fit = 0;
  std::vector<std::string> problems;       // what stopped a run or the prediction
  double observed_fraction() const { return judged == 0 ? 0.0 : static_cast<double>(inconclusive) / judged; }
  double difference_pp() const { return 100.0 * (predicted_fraction - observed_fraction()); }
};

// REQUIRES: window's plan equals the plan the runs were measured with (the caller checks).
WindowFigures score_window(store::RunStore& store_copy, const std::vector<UnitRecord>& units, core::Recipe window,
                           const core::StationCapability& capability);

}  // namespace echoline::score
