// Failure-class accuracy: the class the truth calls for (from the unit's defect label, or for a
// good unit from where its true f0 lies against the band) against the class the daemon reported,
// over the failed units (intermittent units excluded), with the confusion table. Pure; thread-safe.
#pragma once

#include <map>
#include <string>
#include <vector>

#include "daemon/core/recipe.hpp"
#include "tests/score/unit_record.hpp"
#include "tests/score/verdict_score.hpp"

namespace echoline::score {

// Expected for a good unit that failed with its true f0 inside the band: the truth names no
// tuning, so either of the daemon's two "something else" classes is accepted.
inline constexpr const char* kShallowOrOutOfMask = "shallow|out-of-mask";

// open-feed, shorted-feed -> no-response; too-long -> tuned-low; too-short -> tuned-high;
// lossy -> shallow; no defect: true f0 below / above the band -> tuned-low / tuned-high, else
// kShallowOrOutOfMask. "" for an intermittent unit (not scored).
std::string expected_class(const UnitTruth& truth, const TuningBand& band);
bool class_accepted(const std::string& expected, const std::string& reported);

struct ClassFigures {
  int failed = 0;       // failed final runs scored (intermittent units excluded)
  int accepted = 0;     // reported class accepted for the expected one
  std::map<std::string, std::map<std::string, int>> confusion;   // expected -> reported -> units
  std::vector<std::string> misclassified;                         // "SERIAL (...): expected X, reported Y: reason"
  double accuracy() const { return failed == 0 ? 1.0 : static_cast<double>(accepted) / failed; }
};

ClassFigures score_classes(const std::vector<UnitRecord>& units, const core::Recipe& recipe);

}  // namespace echoline::score
