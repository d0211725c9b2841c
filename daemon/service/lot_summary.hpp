// The supervisor's view of one lot (API call lot.summary): yield by the store's one definition,
// failure Pareto, resonance histogram and spread, the last units. lot_summary_json is pure;
// lot_summary reads one lot from the store (never the whole store). Thread-safe.
#pragma once

#include <optional>
#include <string>
#include <vector>

#include <nlohmann/json.hpp>

#include "daemon/core/recipe.hpp"
#include "daemon/core/run_result.hpp"
#include "daemon/store/run_store.hpp"

namespace echoline::service {

inline constexpr int kLastUnitsShown = 50;
inline constexpr int kResonanceBins = 20;

// `runs`: the lot's runs in run order, without points. `yield`: store::RunStore::yield_by for
// the lot (nullopt when it has no runs). The result is documented in API.md (lot.summary).
nlohmann::json lot_summary_json(const std::string& lot, const std::vector<core::RunResult>& runs,
                                const std::optional<store::YieldSummary>& yield, const core::Limits& limits);

// The summary of `lot` from the store, or of the latest lot when `lot` is empty (an empty
// summary when no run has a lot). Reads that lot's runs only (indexed by lot). Errors: storage.
Result<nlohmann::json> lot_summary(store::RunStore& store, std::string lot, const core::Limits& limits);

}  // namespace echoline::service
