// Invented benchmark data: the whip915 recipe (860-970 MHz) at any point count, raw standard
// traces and DUT readings from the one-port model b = E_D + Γ/(1 − E_S·Γ), and stored runs.
// Demo values only. Pure functions; thread-safe.
#pragma once

#include <filesystem>
#include <map>
#include <string>
#include <vector>

#include "daemon/core/recipe.hpp"
#include "daemon/core/recipe_check.hpp"
#include "daemon/core/run_result.hpp"

namespace echoline::bench {

// A temporary folder for the benchmarks' store files, made once, removed when the program exits.
std::filesystem::path temp_folder();

// config/recipes/whip915.jsonc with its one segment resized to `points`.
core::Recipe whip_recipe(int points);
core::StationCapability station_capability();

// Raw OPEN/SHORT/LOAD traces for the recipe's plan (35 dB directivity, 25 dB source match).
std::map<std::string, std::vector<core::Reading>> standard_traces(const core::Recipe& recipe);
// Raw DUT readings of a series-RLC whip resonating at f0_hz (Q 8, 40 ohm).
std::vector<core::Reading> dut_readings(const core::Recipe& recipe, double f0_hz);

// A complete run (judged, with points) for unit `index` of `lot`; resonances spread over
// 895-935 MHz so verdicts vary. started_utc advances one second per index.
core::RunResult make_run(const core::Recipe& recipe, const core::CalibrationRecord& cal,
                         const std::string& lot, int index);

}  // namespace echoline::bench
