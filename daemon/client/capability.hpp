// What this station can do for a recipe (for the offline `recipe check` and `dry-run`), from the
// station config's fixture figures and the source and receiver profiles. Throws ConfigError when
// a profile does not load (edge code). Thread-safe.
#pragma once

#include "daemon/core/fast_capture_plan.hpp"
#include "daemon/core/recipe.hpp"
#include "daemon/core/recipe_check.hpp"
#include "drivers/station_config.hpp"

namespace echoline::client {

// Nominal capability: the coupler's datasheet directivity (calibration measures the real one).
core::StationCapability station_capability(const drivers::StationConfig& config, const core::Recipe& recipe);

// The fast-capture plan this station would run for the recipe (core::plan_fast_capture).
Result<core::FastCapturePlan> fast_capture_plan(const drivers::StationConfig& config, const core::Recipe& recipe);

}  // namespace echoline::client
