// Failure-class accuracy (class_score.hpp).
#include "tests/score/class_score.hpp"

#include <fmt/format.h>

namespace echoline::score {

std::string expected_class(const UnitTruth& truth, const TuningBand& band) {
  const std::string& d = truth.defect;
  if (d == "open-feed" || d == "shorted-feed") return "no-response";
  if (d == "too-long") return "tuned-low";
  if (d == "too-short") return "tuned-high";
  if (d == "lossy") return "shallow";
  if (d == "intermittent") return "";
  if (truth.f0_hz < band.low_hz) return "tuned-low";
  if (truth.f0_hz > band.high_hz) return "tuned-high";
  return kShallowOrOutOfMask;
}

bool class_accepted(const std::string& expected, const std::string& reported) {
  if (expected == kShallowOrOutOfMask) return reported == "shallow" || reported == "out-of-mask";
  return !expected.empty() && expected == reported;
}

ClassFigures score_classes(const std::vector<UnitRecord>& units, const core::Recipe& recipe) {
  ClassFigures c;
  const TuningBand band = tuning_band(recipe);
  for (const UnitRecord& u : units) {
    if (u.run.verdict != core::Verdict::fail || u.truth.defect == "intermittent") continue;
    const std::string expected = expected_class(u.truth, band);
    std::string reported = core::to_string(u.run.failure_class);
    if (reported.empty()) reported = "(none)";
    ++c.failed;
    ++c.confusion[expected][reported];
    if (class_accepted(expected, reported)) {
      ++c.accepted;
    } else {
      c.misclassified.push_back(fmt::format("{} ({}, true f0 {:.2f} MHz, true depth {:.1f} dB): expected {}, reported {}: {}",
                                            u.run.serial, u.truth.defect.empty() ? "no defect" : u.truth.defect,
                                            u.truth.f0_hz / 1e6, u.truth.depth_db, expected, reported, u.run.reason));
    }
  }
  return c;
}

}  // namespace echoline::score
