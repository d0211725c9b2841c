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

}  // namespace echoline::store
