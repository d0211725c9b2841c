// Predicts, before any unit is tested, what a return-loss mask under guarded acceptance will
// decide on this station: per mask segment the reading a unit needs to pass and the reading
// below which it fails, and from the recipe's nominal unit the share of units left inconclusive.
// Used by `recipe check`, `dry-run` and the acceptance scorer. Pure; thread-safe.
// Derivation: daemon/core/MEASUREMENT.md, "Predicting a mask".
#pragma once

#include <cstddef>
#include <optional>
#include <string>
#include <vector>

#include "daemon/core/recipe.hpp"
#include "daemon/core/recipe_check.hpp"

namespace echoline::core {

// The guard band of one mask segment: readings (measured return loss, dB) at or above
// pass_reading_db pass it, readings below fail_reading_db fail it, in between is inconclusive.
// The pass reading is the largest over the segment's points, the fail reading the smallest.
struct MaskGuard {
  std::size_t segment = 0;
  double start_hz = 0, stop_hz = 0;
  double limit_db = 0;
  double pass_reading_db = 0;   // +inf: no reading can pass (the error radius exceeds the limit's |Γ|)
  double fail_reading_db = 0;
};

struct MaskPrediction {
  double error_radius = 0;        // |Γ| units: the judge's e = |E_D|max + k·u_conn (MEASUREMENT.md §3.6)
  double leakage = 0;             // |Γ| units: the coupler's leakage that tilts every reading
  std::vector<MaskGuard> guards;  // one per mask segment, in recipe order
  // From the nominal unit (a series resonance of Q and depth; needs q or bandwidth_hz):
  bool have_unit = false;
  double q = 0, depth_db = 0, center_hz = 0;
  std::optional<double> spread_hz;  // production standard deviation of the resonance
  // Shares of all units when the spread is known; else of the nominal unit alone over the
  // leakage phases.
  // Means over the leakage's phase, which a scalar calibration does not measure; the
  // inconclusive share's smallest and largest value over that phase.
  double pass_fraction = 0, inconclusive_fraction = 0, fail_fraction = 0;
  double inconclusive_low = 0, inconclusive_high = 0;
  bool of_all_units = false;
  // Smallest margin of the nominal (centred) unit's true return loss over the pass reading of
  // its segment, dB (negative: the nominal unit itself is not passed on this station).
  double nominal_margin_db = 0;
  // Coupler directivity (dB) that would bring the inconclusive share to 5 %; empty when the
  // spread is unknown, when it is already there, or when no coupler would (kit and connection).
  std::optional<double> directivity_for_5_percent_db;
  std::string basis;              // one line: what the prediction assumed
};

// error_radius: the bound the judge works with; leakage: the coupler's leakage |d| that tilts the
// readings (a calibration's LOAD reading, or the datasheet directivity). Empty without a mask.
std::optional<MaskPrediction> predict_mask(const Recipe& recipe, const StationCapability& station, double error_radius,
                                           double leakage);

// Before calibration: the coupler's datasheet directivity plus the kit's LOAD residual plus two
// connections (the LOAD's and the unit's) at the coverage factor, the largest over the mask (the
// calibration measures it); the datasheet directivity as the leakage.
std::optional<MaskPrediction> predict_mask(const Recipe& recipe, const StationCapability& station);

}  // namespace echoline::core
