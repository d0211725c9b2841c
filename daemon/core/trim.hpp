// Trim advice for wire elements: resonance scales as 1/length (f·L ≈ const), so the length that
// moves the resonance to target is L·f_meas/f_target (MEASUREMENT.md §9, common practice).
// Pure; thread-safe.
#pragma once

#include <optional>

#include "daemon/core/recipe.hpp"
#include "daemon/core/run_result.hpp"

namespace echoline::core {

// L_new = L·f_measured/f_target. REQUIRES: all arguments > 0.
double trimmed_length_mm(double length_mm, double measured_hz, double target_hz);

// change_mm = L_new − L (negative: cut that much off; positive: the element is too short).
// `at_least` (resonance on the sweep edge) words the text as a minimum.
// Empty when the trim block or the frequency is not usable (<= 0).
std::optional<TrimAdvice> trim_advice(const Trim& trim, double measured_hz, bool at_least = false);

}  // namespace echoline::core
