// echoline-score's command line: the bench (program, config, the station's profiles, kit and
// fixture for it), the lot, how many units, the two recipes, the label, where to work and where
// the figures go. Parsing only; --help exits 0 and a usage error exits 2
// (edge code, called from main). Thread-safe (no shared state).
#pragma once

#include <filesystem>
#include <string>

namespace echoline::score {

struct ScoreOptions {
  std::filesystem::path bench_program;   // --bench (default echoline-sim)
  std::filesystem::path sim_config;      // --sim (default config/sim/instant.jsonc)
  std::filesystem::path lot_file;        // --lot (default config/sim/lots/whip915-rlc-600.jsonc)
  int units = 0;                         // --units: the first N units of the lot; 0 = all
  std::filesystem::path recipe;          // --recipe (default config/recipes/whip915.jsonc)
  std::filesystem::path window_recipe;   // --window-recipe (default config/recipes/whip915-window.jsonc)
  // The station config's instrument profiles, kit and fixture (defaults: echoline-sim's).
  std::filesystem::path source_profile;    // --source-profile (default config/instruments/sim-source.jsonc)
  std::filesystem::path receiver_profile;  // --receiver-profile (default config/instruments/sim-receiver.jsonc)
  std::filesystem::path switch_profile;    // --switch-profile: used when the recipe has the offset pair
                                           // (default config/instruments/sim-switch.jsonc)
  std::filesystem::path kit;               // --kit (default config/kits/sim-kit.jsonc)
  std::filesystem::path fixture;           // --fixture: a JSONC file holding the station config's
                                           // "fixture" object; default none (the harness's own)
  std::string unit_model = "series-rlc";  // --unit-model: the mask prediction's dip shape
  std::string label;                     // --label (default "<lot> @ <sim>", file stems)
  std::filesystem::path work_dir;        // --work-dir: kept; default a temporary folder, removed
  std::filesystem::path json_out;        // --json: all figures; default none
  // --require all|safety: which figures decide the exit code. "safety" = the figures a sound
  // judge must always meet whatever the bench (points outside bounds, escapes, false rejects,
  // trim advice on non-length defects); "all" = every acceptance figure of the issue.
  std::string require = "all";
};

ScoreOptions parse_score_options(int argc, char** argv);

}  // namespace echoline::score
