// The stored form of a calibration's uncertainty budget (core::UncertaintyBudget) as JSON, and
// back. Every number is kept at full precision so a stored run can be re-judged offline exactly.
// Pure; thread-safe.
#pragma once

#include <optional>
#include <string>

#include "daemon/core/budget_types.hpp"

namespace echoline::store {

std::string budget_to_json(const core::UncertaintyBudget& budget);
// Empty budget for "" or "{}" (records made before budgets existed); nullopt for malformed text.
std::optional<core::UncertaintyBudget> budget_from_json(const std::string& text);

}  // namespace echoline::store
