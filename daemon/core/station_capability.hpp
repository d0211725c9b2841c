// What a station can do for a recipe, from its fixture figures (station config) and its source
// and receiver profiles: the figures recipe_check and the daemon's safety checks work from.
// Pure; thread-safe.
#pragma once

#include "daemon/core/fast_capture_plan.hpp"
#include "daemon/core/recipe.hpp"
#include "daemon/core/recipe_check.hpp"
#include "drivers/profile.hpp"
#include "drivers/station_config.hpp"

namespace echoline::core {

// The fast-capture planner's view of the instruments: the profiles' "sweep" figures, and the
// generic ones of FastCaptureInstruments where a profile names none (RBW steps: the 1-3 series
// from 10 Hz to 3 MHz).
FastCaptureInstruments fast_capture_instruments(const drivers::Profile& source, const drivers::Profile& receiver);

// Why the fixture's start-pulse cable cannot be used with these profiles ("" = it can, or
// there is no cable): the source gives no pulse uncertainty, the receiver no trigger figures
// or lacks the trigger operations.
std::string start_pulse_problem(const drivers::FixtureConfig& fixture, const drivers::Profile& source,
                                const drivers::Profile& receiver);

// The quickest fast-capture plan for this station: the LOAD level from the fixture's nominal
// figures (expected reflection minus the datasheet directivity, recipe_check.hpp).
Result<FastCapturePlan> plan_fast_capture(const Recipe& recipe, const drivers::FixtureConfig& fixture,
                                          const drivers::Profile& source, const drivers::Profile& receiver);

// Nominal capability: the coupler's datasheet directivity (calibration measures the real one);
// the noise floor is kTB + NF at the RBW the recipe measures with (in fast-capture mode the
// planned one), plus its input attenuation.
// `kit`: the station's calibration kit (nullptr: the built-in conservative kit).
// `switch_profile`: the calibration switch's profile (nullptr: no switch, the operator connects).
StationCapability station_capability(const drivers::FixtureConfig& fixture, const drivers::Profile& source,
                                     const drivers::Profile& receiver, const Recipe& recipe,
                                     const CalKit* kit = nullptr, const drivers::Profile* switch_profile = nullptr);

}  // namespace echoline::core
