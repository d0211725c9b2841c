// What `recipe check` says about a recipe that reads each unit twice (the offset pair,
// MEASUREMENT.md §12): the kit must define the line, the sweep must be a step sweep, and the
// line must be near half a turn over the plan; without a switch arm through the line the
// operator fits it for each unit (said as a warning). Pure; thread-safe.
#pragma once

#include <vector>

#include "daemon/core/recipe.hpp"
#include "daemon/core/recipe_check.hpp"

namespace echoline::core {

// The switch position that connects the unit through the kit's offset line.
inline constexpr const char* kOffsetArm = "DUT-OFFSET";

// Appends the offset pair's findings for `r` on this station (none when r.offset_pair is false).
void check_offset_pair(const Recipe& r, const StationCapability& st, std::vector<CheckFinding>& out);

}  // namespace echoline::core
