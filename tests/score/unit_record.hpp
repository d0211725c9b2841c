// What echoline-score works on: one unit's final stored run side by side with the simulator's
// ground truth for that unit (true return loss at the run's own points and on a fine grid over
// each mask segment, the defect label, the true f0). Data only.
#pragma once

#include <limits>
#include <string>
#include <vector>

#include "daemon/core/recipe.hpp"
#include "daemon/core/run_result.hpp"

namespace echoline::score {

// The true curve against one mask segment, sampled on the grid.
struct MaskTruth {
  core::LimitSegment segment;
  int grid_points = 0;
  bool met = true;                                              // true RL >= limit at every grid point
  double lowest_rl_db = std::numeric_limits<double>::infinity();   // lowest true RL on the grid
  double lowest_at_hz = 0;
};

struct UnitTruth {
  std::string defect;            // "" for a good unit; open-feed, shorted-feed, too-long, too-short, lossy, intermittent
  std::string model;             // series-rlc | wire-monopole
  double f0_hz = 0;              // frequency of the true return-loss maximum
  double depth_db = std::numeric_limits<double>::quiet_NaN();
  double element_length_mm = 0;
  double nominal_length_mm = 0;
  std::vector<double> rl_at_points_db;   // true RL at the run's stored frequencies (+inf where infinite)
  std::vector<MaskTruth> mask;           // one per mask segment of the recipe, in recipe order
};

struct UnitRecord {
  core::RunResult run;           // the unit's FINAL stored run, with its points
  int runs_stored = 0;           // the serial's runs in the store (retests after aborts included)
  UnitTruth truth;
};

}  // namespace echoline::score
