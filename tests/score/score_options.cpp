// echoline-score's command line (score_options.hpp).
#include "tests/score/score_options.hpp"

#include <cstdio>
#include <cstdlib>
#include <set>
#include <stdexcept>

#include "echoline/version.hpp"
#include "tests/support/process.hpp"

namespace echoline::score {
namespace {

constexpr const char* kUsage = R"(usage: echoline-score [options]
Tests the first N units of a lot through a real bench (echoline-sim unless --bench) and echolined,
then scores every unit's final run against the bench's ground truth and prints the acceptance figures.
  --bench PROGRAM        bench program, started as PROGRAM --config CONFIG --lot FILE --log-file F
                         --log-level warn; it must print echoline-sim's endpoint and ready lines and
                         answer its fixture control requests (default echoline-sim)
  --sim CONFIG           bench config (default config/sim/instant.jsonc)
  --lot FILE             lot (default config/sim/lots/whip915-rlc-600.jsonc)
  --units N              test the first N units of the lot (default: all)
  --recipe FILE          recipe the daemon runs (default config/recipes/whip915.jsonc)
  --window-recipe FILE   recipe with a resonance window, re-judged offline for the centring
                         prediction; same plan as --recipe (default config/recipes/whip915-window.jsonc)
  --source-profile FILE, --receiver-profile FILE
                         instrument profiles in the station config (default config/instruments/
                         sim-source.jsonc and sim-receiver.jsonc)
  --switch-profile FILE  switch profile in the station config when the recipe has the offset pair
                         (default config/instruments/sim-switch.jsonc)
  --kit FILE             calibration kit in the station config (default config/kits/sim-kit.jsonc)
  --fixture FILE         JSONC file with the station config's "fixture" object (default: echoline-sim's
                         coupler, with the directivity of the --sim config's /bench/directivity_db)
  --unit-model MODEL     the dip shape the mask prediction assumes: series-rlc (default) or
                         line-monopole (what the product is, as the engineer knows it)
  --label TEXT           name of this configuration in the summary (default "<lot> @ <sim>")
  --work-dir DIR         work in DIR and keep it (configs, store, logs); default a temporary folder
  --json OUT             write every figure to OUT
  --require all|safety   figures that decide the exit code (default all): safety = 0 points outside
                         bounds, 0 escapes, false rejects <= 1 %, no trim advice on non-length defects
  --help, --version      this text; the program's version
Exit: 0 the required figures met, 1 one is not, 2 usage error, 3 the station could not be run.
)";

[[noreturn]] void usage(const std::string& message) {
  std::fprintf(stderr, "echoline-score: %s\n%s", message.c_str(), kUsage);
  std::exit(2);
}

std::filesystem::path existing_file(const std::string& option, const std::string& value) {
  std::filesystem::path p = std::filesystem::absolute(value);
  if (!std::filesystem::is_regular_file(p)) usage(option + ": no such file: " + value);
  return p;
}

}  // namespace

ScoreOptions parse_score_options(int argc, char** argv) {
  const std::filesystem::path src = testing::source_dir();
  ScoreOptions o;
  o.bench_program = testing::sim_binary();
  o.sim_config = src / "config/sim/instant.jsonc";
  o.lot_file = src / "config/sim/lots/whip915-rlc-600.jsonc";
  o.recipe = src / "config/recipes/whip915.jsonc";
  o.window_recipe = src / "config/recipes/whip915-window.jsonc";
  o.source_profile = src / "config/instruments/sim-source.jsonc";
  o.receiver_profile = src / "config/instruments/sim-receiver.jsonc";
  o.switch_profile = src / "config/instruments/sim-switch.jsonc";
  o.kit = src / "config/kits/sim-kit.jsonc";
  for (int i = 1; i < argc; ++i) {
    const std::string a = argv[i];
    if (a == "--help" || a == "-h") {
      std::fputs(kUsage, stdout);
      std::exit(0);
    }
    if (a == "--version") {
      std::puts(version_line("echoline-score").c_str());
      std::exit(0);
    }
    static const std::set<std::string> kValued = {"--bench", "--sim", "--lot", "--recipe", "--window-recipe",
                                                  "--source-profile", "--receiver-profile", "--switch-profile",
                                                  "--kit", "--fixture",
                                                  "--label", "--unit-model", "--work-dir", "--json", "--require",
                                                  "--units"};
    if (!kValued.count(a)) usage(a.rfind("-", 0) == 0 ? "unknown option " + a : "unexpected argument " + a);
    if (i + 1 >= argc) usage(a + " needs a value");
    const std::string v = argv[++i];
    if (a == "--bench") o.bench_program = existing_file(a, v);
    else if (a == "--sim") o.sim_config = existing_file(a, v);
    else if (a == "--lot") o.lot_file = existing_file(a, v);
    else if (a == "--recipe") o.recipe = existing_file(a, v);
    else if (a == "--window-recipe") o.window_recipe = existing_file(a, v);
    else if (a == "--source-profile") o.source_profile = existing_file(a, v);
    else if (a == "--receiver-profile") o.receiver_profile = existing_file(a, v);
    else if (a == "--switch-profile") o.switch_profile = existing_file(a, v);
    else if (a == "--kit") o.kit = existing_file(a, v);
    else if (a == "--fixture") o.fixture = existing_file(a, v);
    else if (a == "--label") o.label = v;
    else if (a == "--unit-model") {
      if (v != "series-rlc" && v != "line-monopole") usage("--unit-model must be series-rlc or line-monopole");
      o.unit_model = v;
    }
    else if (a == "--work-dir") o.work_dir = std::filesystem::absolute(v);
    else if (a == "--json") o.json_out = std::filesystem::absolute(v);
    else if (a == "--require") {
      if (v != "all" && v != "safety") usage("--require must be all or safety");
      o.require = v;
    }
    else if (a == "--units") {
      std::size_t used = 0;
      try {
        o.units = std::stoi(v, &used);
      } catch (const std::logic_error&) {
        used = 0;
      }
      if (used != v.size() || o.units < 1) usage("--units must be a whole number of at least 1");
    } else {
      usage("unknown option " + a);
    }
  }
  if (o.label.empty()) o.label = o.lot_file.stem().string() + " @ " + o.sim_config.stem().string();
  return o;
}

}  // namespace echoline::score
