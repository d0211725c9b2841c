// What a recipe needs of its instruments: the profile operations its explicit receiver settings
// and its sweep mode take. A station whose profile lacks one of them (declared absent, or an
// optional operation left out) cannot run the recipe (recipe_check). Pure; thread-safe.
#pragma once

#include <string>
#include <string_view>
#include <vector>

#include "daemon/core/recipe.hpp"

namespace echoline::core {

struct NeededOperation {
  std::string_view role;        // "source" | "receiver"
  std::string_view operation;   // profile operation name (drivers/command_template.hpp)
  std::string key;              // recipe key that asks for it, e.g. "/receiver/vbw_hz"
  std::string what;             // the setting in words, e.g. "a VBW of 10 kHz"
};

// The operations fast capture sends besides the ones every profile of the role has.
const std::vector<std::string_view>& fast_capture_operations(std::string_view role);

// Every operation the recipe needs that a profile may lack, in recipe order.
std::vector<NeededOperation> needed_operations(const Recipe& recipe);

}  // namespace echoline::core
