// The lot report of a station's own store (the daemon's report.lot, `echoline report --store`)
// draws the limits of the recipe text stored with the runs, by content hash, and names every
// recipe version a lot used. Real SQLite store; recipes are variants of config/recipes.
#include <gtest/gtest.h>

#include <filesystem>
#include <fstream>
#include <sstream>
#include <string>

#include "daemon/core/recipe_loader.hpp"
#include "daemon/store/documents.hpp"
#include "daemon/store/run_store.hpp"
#include "tests/store/store_test_data.hpp"

namespace echoline::store {
namespace {

std::string window_recipe(const std::string& version, const std::string& min_mhz, const std::string& max_mhz) {
  std::ifstream in(std::filesystem::path(ECHOLINE_SOURCE_DIR) / "config/recipes/whip915-window.jsonc");
  std::stringstream ss;
  ss << in.rdbuf();
  std::string text = ss.str();
  for (auto [from, to] : {std::pair<std::string, std::string>{"\"version\": \"1.0\"", "\"version\": \"" + version + "\""},
                          {"\"resonance_min_hz\": \"905 MHz\"", "\"resonance_min_hz\": \"" + min_mhz + " MHz\""},
                          {"\"resonance_max_hz\": \"925 MHz\"", "\"resonance_max_hz\": \"" + max_mhz + " MHz\""}}) {
    const auto at = text.find(from);
    EXPECT_NE(at, std::string::npos) << from;
    if (at != std::string::npos) text.replace(at, from.size(), to);
  }
  return text;
}

bool has(const std::string& html, const std::string& text) { return html.find(text) != std::string::npos; }

TEST(LotRecipes, StoreReportDrawsTheStoredRecipeOfTheLatestRunAndNamesEveryVersion) {
  const auto dir = testdata::temp_dir("lot-recipes");
  auto st = RunStore::open(dir / "runs.sqlite");
  ASSERT_TRUE(st.ok()) << st.error().message;
  const std::string old_text = window_recipe("2.0", "904", "926");
  const std::string new_text = window_recipe("2.1", "906", "922");
  const core::Recipe old_r = core::parse_recipe(old_text, "old.jsonc");
  const core::Recipe new_r = core::parse_recipe(new_text, "new.jsonc");
  const core::Recipe loaded = core::parse_recipe(window_recipe("7.0", "950", "960"), "loaded.jsonc");
  ASSERT_TRUE((*st)->save_recipe_text(old_r.content_hash, old_r.name, old_r.version, old_text).ok());
  ASSERT_TRUE((*st)->save_recipe_text(new_r.content_hash, new_r.name, new_r.version, new_text).ok());
  for (int i = 0; i < 4; ++i) {
    core::RunResult r = testdata::make_run("U" + std::to_string(i), "LOT-V", i, 915e6);
    const core::Recipe& used = i < 3 ? old_r : new_r;
    r.recipe = {used.name, used.version, used.content_hash};
    ASSERT_TRUE((*st)->save_run(r).ok());
  }
  const LocalRecipe local{loaded.name, loaded.version, loaded.content_hash, "the station's loaded recipe", loaded.limits};

  auto doc = lot_report_document(**st, "LOT-V", local, "");
  ASSERT_TRUE(doc.ok()) << doc.error().message;
  ASSERT_EQ(doc->runs, 4u);
  EXPECT_TRUE(has(doc->content, "LSL 906.0"));   // version 2.1, the recipe of the latest run
  EXPECT_TRUE(has(doc->content, "USL 922.0"));
  EXPECT_FALSE(has(doc->content, "LSL 950.0")) << "the loaded recipe's window was drawn";
  EXPECT_TRUE(has(doc->content, "The runs of this lot used 2 recipe versions"));
  EXPECT_TRUE(has(doc->content, "whip915-window v2.0 (" + old_r.content_hash.substr(0, 12) + "): 3 runs"));
  EXPECT_TRUE(has(doc->content, "whip915-window v2.1 (" + new_r.content_hash.substr(0, 12) + "): 1 run,"));

  // A lot of one version with its text stored: no version note, no stand-in.
  core::RunResult one = testdata::make_run("W1", "LOT-ONE", 50, 915e6);
  one.recipe = {old_r.name, old_r.version, old_r.content_hash};
  ASSERT_TRUE((*st)->save_run(one).ok());
  auto single = lot_report_document(**st, "LOT-ONE", local, "");
  ASSERT_TRUE(single.ok()) << single.error().message;
  EXPECT_TRUE(has(single->content, "LSL 904.0"));
  EXPECT_FALSE(has(single->content, "class=\"notice\""));
  st->reset();
  std::filesystem::remove_all(dir);
}

}  // namespace
}  // namespace echoline::store
