// Audits the run store after (or during) a reliability run: SQLite integrity, complete runs
// only for judged verdicts, no partial pass, each judged run's return loss fits the truth of
// the unit it is stored under, and no pass for a unit whose true return loss misses a limit.
// Reads the store file and asks the simulator for truth. Not thread-safe: one driving thread.
#pragma once

#include <optional>
#include <string>
#include <vector>

#include "tests/soak/station_under_test.hpp"

namespace echoline::soak {

struct AuditOptions {
  int plan_points = 0;         // points of a complete run; 0: the plan of the station's recipe
  bool with_truth = true;      // score judged runs against the simulator's truth
  // A run's return loss may differ from its unit's truth by the bench's error: directivity
  // 35 dB vs a 20 dB dip, source match 25 dB, 0.05 dB reading noise. An RMS misfit above this
  // over the points with truth <= 20 dB means the readings do not belong to the unit.
  double misfit_limit_db = 3.0;
  std::optional<TruthLimits> limits;   // nullopt: the limits of the station's recipe
};

struct AuditResult {
  std::string integrity;         // "ok" when clean
  int stored = 0;                // runs of the lot in the store
  int stored_aborted = 0;
  int judged = 0;                // pass / fail / inconclusive
  int incomplete_judged = 0;     // judged runs whose readings != plan points or != points_count
  int partial_passes = 0;        // pass with fewer readings than the plan
  int truth_scored = 0;          // judged runs compared with the truth
  int misattributed = 0;         // readings that do not fit the unit's truth
  int false_passes = 0;          // pass while the truth misses a limit
  double worst_misfit_db = 0;
  std::string worst_misfit_run;
  std::vector<std::string> problems;
  bool clean() const {
    return integrity == "ok" && incomplete_judged == 0 && partial_passes == 0 && misattributed == 0 && false_passes == 0;
  }
};

AuditResult audit_store(StationUnderTest& station, const AuditOptions& options);

}  // namespace echoline::soak
