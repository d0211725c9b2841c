// Text table of runs for `echoline runs` (time, run id, verdict, class, resonance, depth, reason)
// and lot yield from a list of API run objects. Pure; thread-safe.
#pragma once

#include <string>

#include <nlohmann/json.hpp>

namespace echoline::client {

// `runs`: array of API run objects (API.md), oldest first.
std::string run_table(const nlohmann::json& runs);

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
