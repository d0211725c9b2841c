// Comparing the stations, operators and calibrations of one lot (the lot report's "Stations"
// section when a lot spans benches): yield per group, each group's mean resonance and return
// loss at resonance, and each station against the rest so a drifting bench stands out.
// Pure; thread-safe.
#pragma once

#include <optional>
#include <string>
#include <vector>

#include "daemon/core/run_result.hpp"

namespace echoline::store {

struct MeanOf {
  int n = 0;
  std::optional<double> mean, sd;   // sd: sample standard deviation, n >= 2
};

struct GroupYield {
  std::string key;            // the station, operator or calibration id
  int units = 0;              // distinct serials with a finished run in the group
  int finished_runs = 0;      // pass + fail + inconclusive
  int passed_runs = 0;
  double run_yield = 0;       // passed_runs / finished_runs
  int retests_other_bench = 0;   // runs of units first finished on another station
  MeanOf resonance_hz;        // over finished runs with a resonance
  MeanOf depth_db;            // return loss at resonance, same runs
  // Stations only: this station's mean minus the mean of every other station's runs, and that
  // difference in units of its standard error (Welch; common practice, no source). |z| > 3 with
  // at least 2 runs on each side marks the station as standing out.
  std::optional<double> resonance_diff_hz, resonance_z;
  std::optional<double> depth_diff_db, depth_z;
  bool stands_out = false;
};

struct StationComparison {
  std::vector<GroupYield> by_station, by_operator, by_calibration;   // sorted by key
};

// `runs` oldest first (started_utc, then insertion), as the readers return them.
StationComparison compare_stations(const std::vector<core::RunResult>& runs);

}  // namespace echoline::store
