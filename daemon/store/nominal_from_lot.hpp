// What a recipe's nominal_unit would say, taken from a lot the station has tested: the final runs
// it passed or left undecided (the good and the undecided units, not the failed ones), their
// median bandwidth and depth and the spread of their resonance, ready to paste into a recipe.
// Used by the lot report. Pure.
#pragma once

#include <optional>
#include <string>
#include <vector>

#include "daemon/core/run_result.hpp"

namespace echoline::store {

struct NominalFromLot {
  int units = 0;                           // final runs used (pass or inconclusive)
  std::optional<double> bandwidth_hz;      // median over the runs whose band closes inside the sweep
  // Runs whose band reached the first or last swept point: their bandwidth is only a lower
  // bound (the dip is wider than the sweep shows), so they are left out of the median.
  int bandwidth_clipped = 0;
  std::optional<double> depth_db;          // median return loss at resonance
  std::optional<double> resonance_sd_hz;   // sample standard deviation (n − 1) of the resonance, n >= 2
  // The recipe text: "nominal_unit": { ... } with what is known (empty when nothing is). The
  // centre is left out on purpose: a scalar bench reads every resonance shifted by its own
  // leakage, so the measured mean is this bench's, not the units'.
  std::string snippet;
};

NominalFromLot nominal_from_lot(const std::vector<core::RunResult>& runs);

}  // namespace echoline::store
