// Predicts, before any unit is tested, how well a scalar station can place a resonance: the
// half-width of the guarded resonance interval for the recipe's nominal unit, and the fraction
// of units a resonance window will leave inconclusive. Used by `recipe check` and `dry-run`.
// Pure; thread-safe. Derivation: daemon/core/MEASUREMENT.md, "Predicting the window".
#pragma once

#include <optional>
#include <string>

#include "daemon/core/recipe.hpp"
#include "daemon/core/recipe_check.hpp"

namespace echoline::core {

struct CentringPrediction {
  double error_radius = 0;        // E at the dip, |Γ| units (directivity bound + LOAD residual + k·connection)
  double slope_per_hz = 0;        // |dΓ/df| at resonance of the nominal unit
  double q = 0;                   // the nominal unit's Q (given, or from its bandwidth)
  double half_width_hz = 0;       // predicted half-width of the resonance interval
  bool rigorous = false;          // the nominal dip fails the shift bound's assumptions: the rigorous interval
  double center_hz = 0;           // where the production resonances are centred
  std::optional<double> spread_hz;   // production standard deviation, when the recipe gives it
  // Units inconclusive for the window: of all units when the spread is known (normal spread
  // around center_hz), else of units spread evenly across the window ("well-centred units").
  double inconclusive_fraction = 0;
  bool of_all_units = false;
  // Directivity (dB, the coupler's own) that would bring the fraction to 5 %; empty when even a
  // perfect coupler would not (the kit's LOAD and the connection alone are too much).
  std::optional<double> directivity_for_5_percent_db;
  // With the offset pair: how many dB better the kit's line match, connection repeatability and
  // LOAD would each have to be for 5 % (empty when even 40 dB would not, or it is already met).
  std::optional<double> kit_gain_for_5_percent_db;
  // The same with the test port moved to the coupler (no test-port cable; 0 when that alone would
  // do; empty when even 40 dB would not, or no advice is given).
  std::optional<double> kit_gain_at_coupler_db;
  std::string basis;              // one line: what the prediction assumed
};

// Empty when the recipe has no resonance window or no nominal unit (q or bandwidth_hz).
std::optional<CentringPrediction> predict_centring(const Recipe& recipe, const StationCapability& station);

// The same from a given error radius (e.g. a calibration's measured directivity bound).
std::optional<CentringPrediction> predict_centring(const Recipe& recipe, const StationCapability& station,
                                                   double error_radius);

}  // namespace echoline::core
