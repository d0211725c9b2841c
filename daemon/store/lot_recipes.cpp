// resolve_lot_recipes: group a lot's runs by recipe content hash, parse each stored text for its
// limits, pick the limits the report draws and write the notes the report shows about them.
#include "daemon/store/lot_recipes.hpp"

#include <fmt/format.h>

#include <exception>

#include "daemon/core/recipe_loader.hpp"
#include "daemon/store/lot_report.hpp"

namespace echoline::store {
namespace {

std::string short_hash(const std::string& hash) { return hash.empty() ? "no hash" : hash.substr(0, 12); }

std::string label(const RecipeVersionUse& v) {
  return fmt::format("{}{} ({})", v.name.empty() ? "unnamed recipe" : v.name, v.version.empty() ? "" : " v" + v.version,
                     short_hash(v.content_hash));
}

}  // namespace

LotRecipes resolve_lot_recipes(const std::vector<core::RunResult>& runs,
                               const std::map<std::string, std::optional<std::string>>& texts,
                               const std::optional<LocalRecipe>& local) {
  LotRecipes out;
  std::map<std::string, std::size_t> index;   // content hash -> versions[i]
  std::size_t latest = runs.size();            // the lot's latest run
  for (std::size_t i = 0; i < runs.size(); ++i) {
    const auto& r = runs[i];
    auto [it, fresh] = index.emplace(r.recipe.content_hash, out.versions.size());
    if (fresh) {
      RecipeVersionUse v;
      v.content_hash = r.recipe.content_hash;
      v.name = r.recipe.name;
      v.version = r.recipe.version;
      v.first_started_utc = v.last_started_utc = r.started_utc;
      out.versions.push_back(std::move(v));
    }
    RecipeVersionUse& v = out.versions[it->second];
    ++v.runs;
    if (r.started_utc < v.first_started_utc) v.first_started_utc = r.started_utc;
    if (r.started_utc >= v.last_started_utc) v.last_started_utc = r.started_utc;
    if (latest == runs.size() || r.started_utc >= runs[latest].started_utc) latest = i;
  }
  for (std::size_t i : final_runs(runs)) ++out.versions[index.at(runs[i].recipe.content_hash)].units;

  for (auto& v : out.versions) {
    auto t = texts.find(v.content_hash);
    if (t != texts.end() && t->second) {
      try {
        v.limits = core::parse_recipe(*t->second, fmt::format("stored recipe {}", label(v))).limits;
      } catch (const std::exception& e) {
        v.problem = fmt::format("its stored text does not read: {}", e.what());
      }
    } else if (local && !v.content_hash.empty() && local->content_hash == v.content_hash) {
      v.limits = local->limits;
      v.from_local = true;
    } else {
      v.problem = v.content_hash.empty() ? "the runs carry no recipe content hash" : "its text is not stored with the runs";
    }
  }

  if (out.versions.size() > 1) {
    std::string list;
    for (const auto& v : out.versions) {
      list += fmt::format("{}{}: {} run{}, latest run of {} unit{}, {} to {}", list.empty() ? "" : "; ", label(v), v.runs,
                          v.runs == 1 ? "" : "s", v.units, v.units == 1 ? "" : "s", v.first_started_utc, v.last_started_utc);
    }
    out.notes.push_back(fmt::format("The runs of this lot used {} recipe versions: {}. Each run was judged by its own "
                                    "version; the limit lines and the Cpk window below are those of one version only.",
                                    out.versions.size(), list));
  }

  // The latest run's version, else the latest run whose version's limits are known.
  const RecipeVersionUse* chosen = nullptr;
  if (latest < runs.size()) {
    const RecipeVersionUse& v = out.versions[index.at(runs[latest].recipe.content_hash)];
    if (v.limits) chosen = &v;
  }
  for (std::size_t i = runs.size(); !chosen && i-- > 0;) {
    const RecipeVersionUse& v = out.versions[index.at(runs[i].recipe.content_hash)];
    if (v.limits) chosen = &v;
  }
  for (const auto& v : out.versions) {
    if (v.problem.empty()) continue;
    out.notes.push_back(fmt::format("The limits of recipe {} ({} run{}) are unknown here: {}.", label(v), v.runs,
                                    v.runs == 1 ? "" : "s", v.problem));
  }
  if (chosen) {
    out.drawn = chosen->limits;
    out.drawn_from = fmt::format("recipe {}{}", label(*chosen),
                                 chosen->from_local ? fmt::format(", from {} (same content as the runs' recipe)", local->source)
                                                    : ", as stored with the runs");
    if (latest < runs.size() && chosen->content_hash != runs[latest].recipe.content_hash) {
      out.notes.push_back(fmt::format("Limit lines are those of {}, not of the recipe of the lot's latest run.",
                                      out.drawn_from));
    }
  } else if (local) {
    out.drawn = local->limits;
    out.drawn_from = fmt::format("recipe {}{} ({}) from {}", local->name, local->version.empty() ? "" : " v" + local->version,
                                 short_hash(local->content_hash), local->source);
    out.notes.push_back(fmt::format("Limit lines are those of {}, which did NOT judge these runs: no recipe these runs "
                                    "used is known here.", out.drawn_from));
  } else {
    out.drawn_from = "none: no recipe these runs used is known here";
  }
  return out;
}

}  // namespace echoline::store
