// The mask prediction against the lot: the recipe's mask predicted from the calibration's error
// radius and LOAD reading, and a nominal unit (bandwidth, depth, spread) taken from the lot's own
// undecided-or-passing runs (what an engineer has before the line runs: measured known-good
// units) centred on the recipe's trim target, compared with the share of units the station
// left inconclusive. Reads the store copy; one driving thread.
#pragma once

#include <string>
#include <vector>

#include "daemon/core/mask_prediction.hpp"
#include "daemon/core/recipe.hpp"
#include "daemon/core/recipe_check.hpp"
#include "daemon/store/run_store.hpp"
#include "tests/score/unit_record.hpp"
#include "tests/score/verdict_score.hpp"

namespace echoline::score {

struct MaskFigures {
  bool predicted = false;
  int reference_count = 0;          // runs the nominal unit came from (not failed)
  double error_radius = 0;
  double leakage = 0;               // median LOAD reading over the mask, |Γ|
  double predicted_fraction = 0;    // inconclusive, of all units (mean over the leakage phase)
  double predicted_low = 0, predicted_high = 0;   // its range over the leakage phase
  double observed_fraction = 0;     // inconclusive final runs, of all units
  std::vector<core::MaskGuard> guards;
  std::string basis;
  std::vector<std::string> problems;
  bool within_range() const { return observed_fraction >= predicted_low - 1e-9 && observed_fraction <= predicted_high + 1e-9; }
  double difference_pp() const { return 100 * (predicted_fraction - observed_fraction); }
};

// calibration_id: the calibration whose error radius predicts (the one that judged most runs).
MaskFigures score_mask(store::RunStore& store_copy, const std::vector<UnitRecord>& units, core::Recipe recipe,
                       const core::StationCapability& capability, const std::string& calibration_id,
                       const VerdictFigures& verdicts);

}  // namespace echoline::score
