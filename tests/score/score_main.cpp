// echoline-score: the acceptance scorer for "Verdicts that hold on any bench". Tests the first N
// units of a lot through real bench (echoline-sim by default) and echolined processes, then
// scores every unit's final run against the bench's ground truth: true return loss against the
// stored bounds, escapes, false rejects, inconclusives, failure classes, trim advice, and the
// centring prediction for a resonance window against offline re-judging. Prints a summary, writes JSON.
// Exit 0 every acceptance figure met, 1 one is not, 2 usage error, 3 the station could not run.
#include <chrono>
#include <cstdio>
#include <fstream>
#include <optional>
#include <string>
#include <vector>

#include <fmt/format.h>

#include "daemon/client/capability.hpp"
#include "daemon/core/recipe_loader.hpp"
#include "drivers/jsonc.hpp"
#include "drivers/station_config.hpp"
#include "tests/score/class_score.hpp"
#include "tests/score/lot_session.hpp"
#include "tests/score/score_options.hpp"
#include "tests/score/score_report.hpp"
#include "tests/score/truth_query.hpp"
#include "tests/score/verdict_score.hpp"
#include "tests/score/window_score.hpp"
#include "tests/soak/station_under_test.hpp"
#include "tests/support/process.hpp"

namespace {

using namespace echoline;
using namespace echoline::score;
namespace fs = std::filesystem;
using Clock = std::chrono::steady_clock;

constexpr int kExitUsage = 2;
constexpr int kExitStation = 3;

struct Inputs {
  core::Recipe recipe;
  core::Recipe window;
  std::optional<double> directivity_db;   // the simulated coupler's, when the bench config states it
  std::optional<nlohmann::json> fixture;  // --fixture's object, when given
};

// Loads both recipes, the bench's directivity and the --fixture object; a bad file or two
// different plans is a usage error.
Inputs load_inputs(const ScoreOptions& o) {
  Inputs in;
  try {
    in.recipe = core::load_recipe(o.recipe);
    in.window = core::load_recipe(o.window_recipe);
    in.directivity_db = drivers::JsoncDocument::load(o.sim_config).optional_number(drivers::JsonPointer("/bench/directivity_db"), "dB");
    if (!o.fixture.empty()) {
      const drivers::JsoncDocument fixture = drivers::JsoncDocument::load(o.fixture);
      fixture.require_object(drivers::JsonPointer(""));
      in.fixture = fixture.root();
      // The fixture's datasheet directivity when it states one; else the bench file's.
      if (auto d = fixture.optional_number(drivers::JsonPointer("/nominal_directivity_db"), "dB")) in.directivity_db = d;
    }
  } catch (const drivers::ConfigError& e) {
    std::fprintf(stderr, "echoline-score: %s\n", e.what());
    std::exit(kExitUsage);
  }
  if (core::plan_frequencies(in.recipe) != core::plan_frequencies(in.window)) {
    std::fprintf(stderr, "echoline-score: %s and %s sweep different plans; the window recipe is re-judged on the "
                 "main recipe's readings, so they must be the same\n", o.recipe.c_str(), o.window_recipe.c_str());
    std::exit(kExitUsage);
  }
  if (!in.window.limits.resonance_min_hz) {
    std::fprintf(stderr, "echoline-score: %s has no resonance window\n", o.window_recipe.c_str());
    std::exit(kExitUsage);
  }
  return in;
}

ScoreResult run(const ScoreOptions& o, const Inputs& in, const fs::path& dir) {
  ScoreResult r;
  r.label = o.label;
  r.sim_config = o.sim_config.string();
  r.lot_file = o.lot_file.string();
  r.recipe = o.recipe.string();
  r.window_recipe = o.window_recipe.string();

  soak::StationSetup setup;
  setup.work_dir = dir;
  setup.bench_program = o.bench_program;
  setup.sim_config = o.sim_config;
  setup.source_profile = o.source_profile;
  setup.receiver_profile = o.receiver_profile;
  setup.calibration_kit = o.kit;
  setup.fixture = in.fixture;
  setup.lot_file = o.lot_file;
  setup.recipe = o.recipe;
  setup.lot_name = "SCORE-" + o.lot_file.stem().string();
  setup.client_name = "echoline-score";
  // The offset pair reads each unit through the switch's DUT-OFFSET arm.
  setup.use_switch = in.recipe.offset_pair;
  setup.switch_profile = o.switch_profile;
  // The station config states the coupler's datasheet directivity, as an engineer would.
  if (in.directivity_db) setup.nominal_directivity_db = *in.directivity_db;
  r.directivity_db = setup.nominal_directivity_db;

  soak::StationUnderTest station(setup);
  station.start_simulator();
  station.start_daemon();
  std::vector<std::string> tested;
  r.station = test_lot(station, o.units, &tested);

  const auto t0 = Clock::now();
  const fs::path copy = dir / "score-copy.sqlite";
  copy_store(station.store_file(), copy);
  auto store = store::RunStore::open(copy);
  if (!store) throw std::runtime_error("store copy: " + store.error().message);
  std::vector<int> counts;
  std::vector<core::RunResult> finals = final_runs(**store, setup.lot_name, tested, &counts, &r.station.problems);

  std::vector<UnitRecord> units;
  units.reserve(finals.size());
  for (std::size_t i = 0; i < finals.size(); ++i) {
    UnitRecord u;
    std::vector<double> freqs;
    for (const auto& p : finals[i].points) freqs.push_back(p.frequency_hz);
    u.truth = query_truth(station, finals[i].serial, freqs, in.recipe);
    u.runs_stored = counts[i];
    u.run = std::move(finals[i]);
    units.push_back(std::move(u));
  }
  r.verdicts = score_verdicts(units, in.recipe);
  r.classes = score_classes(units, in.recipe);
  const core::StationCapability capability =
      client::station_capability(drivers::load_station_config(station.station_config_file()), in.window);
  r.window = score_window(**store, units, in.window, capability);
  const core::StationCapability mask_capability =
      client::station_capability(drivers::load_station_config(station.station_config_file()), in.recipe);
  core::Recipe mask_recipe = in.recipe;
  mask_recipe.nominal.line_monopole = o.unit_model == "line-monopole";
  r.mask = score_mask(**store, units, mask_recipe, mask_capability, r.window.calibration_id, r.verdicts);
  r.checks = acceptance(r.verdicts, r.classes, r.window);
  r.station.score_s = std::chrono::duration<double>(Clock::now() - t0).count();
  return r;
}

}  // namespace

int main(int argc, char** argv) {
  const ScoreOptions o = parse_score_options(argc, argv);
  std::setvbuf(stdout, nullptr, _IOLBF, 0);
  const Inputs in = load_inputs(o);
  std::optional<testing::TempDir> temp;
  fs::path dir = o.work_dir;
  try {
    if (dir.empty()) {
      temp.emplace("echoline-score");
      dir = temp->path();
    } else {
      fs::create_directories(dir);
    }
    const ScoreResult r = run(o, in, dir);
    print_report(stdout, r);
    if (!o.json_out.empty()) {
      std::ofstream out(o.json_out);
      out << report_json(r).dump(2) << "\n";
      if (!out) throw std::runtime_error(o.json_out.string() + ": cannot write");
    }
    if (!r.station.problems.empty() || r.verdicts.units == 0) {
      std::fprintf(stderr, "echoline-score: the station did not run cleanly (see \"station problems\"); figures are not "
                   "trusted%s\n", temp ? " (use --work-dir DIR to keep its logs)" : "");
      return kExitStation;
    }
    return (o.require == "safety" ? r.safety_met() : r.all_met()) ? 0 : 1;
  } catch (const std::exception& e) {
    std::fprintf(stderr, "echoline-score: %s%s\n", e.what(),
                 temp ? " (logs removed; use --work-dir DIR to keep them)" : "");
    return kExitStation;
  }
}
