// Everything from raw DUT readings to a verdict: calibrate, analyse, decide, classify, advise.
// Pure; thread-safe.
#pragma once

#include <optional>
#include <string>
#include <vector>

#include "daemon/core/recipe.hpp"
#include "daemon/core/run_result.hpp"

namespace echoline::core {

struct Judgement {
  std::vector<PointResult> points;
  Metrics metrics;
  Verdict verdict = Verdict::aborted;
  FailureClass failure_class = FailureClass::none;
  std::string reason;
  std::optional<TrimAdvice> trim;
};

// REQUIRES nothing: readings that do not match the calibration (count or frequencies), an
// invalid calibration or non-finite readings give Verdict::aborted with the reason — never pass.
// The bounds come from the calibration's uncertainty budget (which holds the source match); a
// calibration without one (made by an older version) gives aborted with "calibrate again".
struct JudgeOptions {
  bool fit = true;   // try the dip fit (false: the resonance intervals of the points alone)
};
// `offset`: the unit read again through the kit's offset line (recipe.offset_pair), in plan
// order. A recipe with the offset pair and no usable second reading (missing, the wrong size or
// frequencies, a calibration without the line) gives aborted; a recipe without it ignores them.
// Where the two readings disagree beyond both bounds the unit is judged on the direct reading
// alone and a pass becomes inconclusive.
Judgement judge(const Recipe& recipe, const CalibrationRecord& cal, const std::vector<Reading>& dut,
                const JudgeOptions& options = {}, const std::vector<Reading>& offset = {});

}  // namespace echoline::core
