// Yield arithmetic over run outcomes (pure): counts per verdict and class, first-pass and final
// yield per group. The store feeds it rows in run order. Thread-safe.
#pragma once

#include <string>
#include <vector>

#include "daemon/store/run_store.hpp"

namespace echoline::store {

// One run's outcome. REQUIRES: rows in run order (started_utc, then insertion) within a group.
struct RunOutcome {
  std::string group;
  std::string serial;
  std::string verdict;        // "pass" | "fail" | "inconclusive" | "aborted"
  std::string failure_class;  // "" when none
};

// One summary per group, in order of first appearance. Definitions in run_store.hpp.
std::vector<YieldSummary> summarize_yield(const std::vector<RunOutcome>& rows);

// Adds `sign` (+1 or -1) times `part` to `total`: runs, runs by verdict and class, units tested,
// first and final pass; then the two yields again. A class whose count falls to 0 is removed, as
// summarize_yield never lists one. Parts must be whole serials (every run of a serial in a group),
// since units count once per serial.
void add_yield(YieldSummary& total, const YieldSummary& part, int sign);

}  // namespace echoline::store
