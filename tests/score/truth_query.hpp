// Ground truth for a scored run: asks the simulator's fixture control port for the unit's true
// return loss at the run's own frequencies and on a fine grid (0.1 MHz) over each mask segment of
// the recipe, and judges the true curve against each segment. I/O through StationUnderTest on
// one driving thread; the grid and the segment judgement are pure.
#pragma once

#include <string>
#include <vector>

#include "daemon/core/recipe.hpp"
#include "tests/score/unit_record.hpp"
#include "tests/soak/station_under_test.hpp"

namespace echoline::score {

inline constexpr double kTruthGridStepHz = 0.1e6;

// start, start + step, ... and stop itself (inclusive ends).
std::vector<double> segment_grid(const core::LimitSegment& segment, double step_hz = kTruthGridStepHz);

// The true curve (rl_db[i] at frequencies_hz[i]) against one segment: every sample inside the
// segment's inclusive range counts. REQUIRES: equal sizes.
MaskTruth judge_segment(const core::LimitSegment& segment, const std::vector<double>& frequencies_hz,
                        const std::vector<double>& rl_db);

// One truth request for the run's frequencies and every segment's grid. Throws
// std::runtime_error when the simulator does not answer or answers with fewer values.
UnitTruth query_truth(soak::StationUnderTest& station, const std::string& serial,
                      const std::vector<double>& run_frequencies_hz, const core::Recipe& recipe);

}  // namespace echoline::score
