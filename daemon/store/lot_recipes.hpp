// Which recipe versions (content hashes) judged a lot's runs, and the limits the lot report draws:
// those of the recipe text stored with the runs, never a recipe file that happens to be at hand.
// Pure: the texts are looked up by the caller (documents.cpp). Thread-safe.
#pragma once

#include <map>
#include <optional>
#include <string>
#include <vector>

#include "daemon/core/recipe.hpp"
#include "daemon/core/run_result.hpp"

namespace echoline::store {

// A recipe the caller has at hand (the daemon's loaded recipe, the client's --recipe file). Used
// only for runs whose recipe text is not stored, and then named as such.
struct LocalRecipe {
  std::string name, version, content_hash;
  std::string source;    // where it came from, for the report: "recipe file whip915.jsonc", ...
  core::Limits limits;
};

// One recipe version the lot's runs used.
struct RecipeVersionUse {
  std::string content_hash, name, version;
  int runs = 0;          // runs of the lot judged with it
  int units = 0;         // units whose latest run (final_runs) used it
  std::string first_started_utc, last_started_utc;
  std::optional<core::Limits> limits;   // nullopt: neither stored nor the local recipe (see problem)
  bool from_local = false;              // limits from the local recipe with the same content hash
  std::string problem;                  // why its limits are unknown ("" when known)
};

struct LotRecipes {
  std::vector<RecipeVersionUse> versions;   // in the order they first appear among the input runs
  std::optional<core::Limits> drawn;        // the limit lines and Cpk window; nullopt: none drawn
  std::string drawn_from;                   // which recipe they are, in words
  std::vector<std::string> notes;           // what the report must say above everything else
};

// texts: content hash -> stored text (a hash absent or mapped to nullopt: not stored).
// The report draws the limits of the version of the lot's latest run; when that one's are
// unknown, those of the latest run whose version's are known; when none is known, the local
// recipe's, with a note that says they did not judge these runs (or nothing, without one).
// More than one version gives a note naming each with its runs and units.
LotRecipes resolve_lot_recipes(const std::vector<core::RunResult>& runs,
                               const std::map<std::string, std::optional<std::string>>& texts,
                               const std::optional<LocalRecipe>& local);

}  // namespace echoline::store
