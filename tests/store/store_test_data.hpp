// Invented demo data for the store tests: 915 MHz whip antennas (902–928 MHz band) measured over
// 880–950 MHz, a series-RLC return-loss curve per unit, and temp folders. Demo values only.
#pragma once

#include <filesystem>
#include <string>

#include "daemon/core/recipe.hpp"
#include "daemon/core/run_result.hpp"

namespace echoline::store::testdata {

// A fresh empty folder under the system temp dir; removed by the caller if it wants.
std::filesystem::path temp_dir(const std::string& tag);

// A run of `points` points (880–950 MHz) for a unit resonating at f0_hz with depth set by r_ohm.
// Verdict and class as given; started_utc = "2026-03-02T08:" + minute/second from `index`.
core::RunResult make_run(const std::string& serial, const std::string& lot, int index, double f0_hz,
                         core::Verdict verdict = core::Verdict::pass,
                         core::FailureClass cls = core::FailureClass::none, int points = 201);

// "2026-03-02T08:00:00.000Z" + index seconds (index < 86400).
std::string utc_at(int index);

// The demo recipe's limits: RL >= 9.54 dB over 902–928 MHz, resonance window 905–925 MHz.
core::Limits demo_limits();

core::CalibrationRecord make_calibration(const std::string& id, const std::string& created_utc, int points = 201);

}  // namespace echoline::store::testdata
