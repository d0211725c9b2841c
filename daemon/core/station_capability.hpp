// What a station can do for a recipe, from its fixture figures (station config) and its source
// and receiver profiles: the figures recipe_check and the daemon's safety checks work from.
// Pure; thread-safe.
#pragma once

#include "daemon/core/recipe.hpp"
#include "daemon/core/recipe_check.hpp"
#include "drivers/profile.hpp"
#include "drivers/station_config.hpp"

namespace echoline::core {

// Nominal capability: the coupler's datasheet directivity (calibration measures the real one);
// the noise floor is kTB + NF at the RBW the recipe measures with, plus its input attenuation.
// `kit`: the station's calibration kit (nullptr: the built-in conservative kit).
StationCapability station_capability(const drivers::FixtureConfig& fixture, const drivers::Profile& source,
                                     const drivers::Profile& receiver, const Recipe& recipe,
                                     const CalKit* kit = nullptr);

}  // namespace echoline::core
