// Text table of runs for `echoline runs` (time, [serial,] run id, verdict, class, resonance, depth, reason)
// and lot yield from a list of API run objects. Pure; thread-safe.
#pragma once

#include <string>

#include <nlohmann/json.hpp>

namespace echoline::client {

// `runs`: array of API run objects (API.md), oldest first. When the runs come from more than one
// station a station column is added, and a run marked retest_other_bench says so before its reason.
// with_serial: a serial column after the time (a lot's listing; one unit's has no need of it).
std::string run_table(const nlohmann::json& runs, bool with_serial = false);

// Marks each run (oldest first) whose serial already had a finished run on another station:
// "retest_other_bench" = that station (the latest such). A station cannot know this itself, so
// only a reader of the central database sees it.
void mark_retests_on_other_benches(nlohmann::json& runs);

// Yield as the store defines it (daemon/store/yield.hpp): a unit's latest finished run decides.
struct LotYield {
  int units = 0;          // distinct serials
  int judged = 0;         // units with at least one finished (non-aborted) run
  int passed = 0;         // units whose latest finished run passed
  double yield = 0;       // passed / judged, 0 when none judged
};
// `runs` oldest first.
LotYield lot_yield(const nlohmann::json& runs);

}  // namespace echoline::client
