// The offset pair end to end: a station with the simulator's switch and a recipe that reads
// each unit twice (whip915-pair). The daemon sweeps the unit on the DUT arm, then on the
// DUT-OFFSET arm (behind the kit's quarter-wave line), stores both raw traces, and every
// point's interval holds the simulator's ground truth; without the switch the operator is
// asked to fit the line. Real processes, SCPI on loopback TCP.
#include <cmath>
#include <fstream>

#include <gtest/gtest.h>

#include "daemon/core/judge.hpp"
#include "daemon/core/recipe_loader.hpp"
#include "daemon/store/run_store.hpp"
#include "tests/core/e2e_station.hpp"

namespace echoline::e2e {
namespace {

std::filesystem::path pair_station(const std::filesystem::path& dir, const Sim& sim) {
  auto config = write_station_config(dir, sim, "whip915-pair.jsonc");
  json cfg = json::parse(std::ifstream(config));
  cfg["instruments"].push_back({{"role", "switch"}, {"name", "calswitch"}, {"address", sim.endpoint("switch")},
                                {"profile", (testing::source_dir() / "config/instruments/sim-switch.jsonc").string()}});
  std::ofstream(config) << cfg.dump(2) << "\n";
  return config;
}

// Stops the daemon (its runs are all stored then) and opens its run store with the newest
// calibration.
std::pair<std::unique_ptr<store::RunStore>, core::CalibrationRecord> stop_and_open_store(std::optional<Daemon>& daemon,
                                                                                        const std::filesystem::path& dir) {
  EXPECT_EQ(daemon->process().terminate(30s), 0);
  daemon.reset();
  auto store = store::RunStore::open_read_only(dir / "data" / "e2e-bench.sqlite");
  if (!store.ok()) throw std::runtime_error("run store: " + store.error().message);
  auto cal = (*store)->latest_calibration();
  if (!cal.ok() || !cal->has_value()) throw std::runtime_error("no calibration stored");
  core::CalibrationRecord c = **cal;
  return {std::move(*store), std::move(c)};
}

// Every point's interval of a stored run holds the simulator's ground truth (the bounds are
// derived; an intermittent unit's reflection changes from reading to reading, so it is skipped),
// and the run judged again offline from its stored traces keeps its verdict.
void expect_truth_inside_and_same_verdict(Sim& sim, const core::RunResult& run, const core::CalibrationRecord& cal,
                                          const core::Recipe& recipe) {
  std::vector<double> freqs;
  for (const auto& p : run.points) freqs.push_back(p.frequency_hz);
  json truth = sim.control({{"cmd", "truth"}, {"unit", run.serial}, {"frequencies_hz", freqs}});
  ASSERT_TRUE(truth["ok"].get<bool>()) << truth.dump();
  if (truth["defect"] != "intermittent") {
    for (std::size_t i = 0; i < run.points.size(); ++i) {
      if (truth["return_loss_db"][i].is_null()) continue;
      const double rl = truth["return_loss_db"][i].get<double>();
      EXPECT_LE(run.points[i].return_loss_worst_db, rl + 1e-6) << run.serial << " at " << freqs[i];
      EXPECT_GE(run.points[i].return_loss_best_db, rl - 1e-6) << run.serial << " at " << freqs[i];
    }
  }
  const core::Judgement again = core::judge(recipe, cal, core::direct_readings(run), {}, core::offset_readings(run));
  EXPECT_EQ(core::to_string(again.verdict), core::to_string(run.verdict)) << run.serial;
}

TEST(DaemonOffsetPair, EachUnitIsReadTwiceAndBothTracesAreStored) {
  testing::TempDir dir("echoline-daemon-offset-pair");
  Sim sim("tiny-lot.jsonc", "instant-d25.jsonc");
  const auto config = pair_station(dir.path(), sim);
  std::optional<Daemon> daemon;
  daemon.emplace(config);
  Api api = Api::connect(*daemon);
  json cal = calibrate(api, sim);   // the switch selects every standard: no prompt
  ASSERT_EQ(cal["event"], "result") << cal.dump().substr(0, 400);
  ASSERT_TRUE(cal["calibration"]["valid"].get<bool>()) << cal.dump().substr(0, 400);
  const std::vector<std::string> serials = {"TINY-01", "TINY-02", "TINY-03", "TINY-04"};
  std::vector<std::string> run_ids;
  std::vector<int> progress_of;
  for (const std::string& s : serials) {
    int progress = 0;
    json last;
    json run = test_unit(api, sim, s, "TINY", &progress, &last);
    EXPECT_NE(run["verdict"], "aborted") << run.dump().substr(0, 400);
    EXPECT_GT(progress, 0);
    // Progress counts both sweeps and reaches its end (checked against the stored points below).
    ASSERT_TRUE(last.contains("of")) << last.dump();
    EXPECT_EQ(last["point"].get<int>(), last["of"].get<int>()) << last.dump();
    progress_of.push_back(last["of"].get<int>());
    run_ids.push_back(run["run_id"]);
  }
  auto [store, c] = stop_and_open_store(daemon, dir.path());
  // The calibration keeps the kit's line (config/kits/sim-kit.jsonc: 273.2 ps).
  ASSERT_TRUE(c.budget.offset_line.has_value());
  EXPECT_NEAR(c.budget.offset_line->delay_s, 273.2e-12, 1e-18);
  const core::Recipe recipe = core::load_recipe(testing::source_dir() / "config/recipes/whip915-pair.jsonc");
  for (std::size_t u = 0; u < run_ids.size(); ++u) {
    auto run = store->load_run(run_ids[u]);
    ASSERT_TRUE(run.ok()) << run.error().message;
    const std::vector<core::Reading> offset = core::offset_readings(*run);
    ASSERT_EQ(offset.size(), run->points.size()) << serials[u] << ": the second trace is not stored at every point";
    EXPECT_EQ(progress_of[u], 2 * static_cast<int>(run->points.size())) << serials[u] << ": progress of both sweeps";
    // The line turns the unit's reflection by half a turn, so the two readings differ where
    // the unit reflects about as much as the coupler leaks (the parallelogram law).
    double largest = 0;
    for (std::size_t i = 0; i < offset.size(); ++i) {
      largest = std::max(largest, std::fabs(offset[i].raw_dbm - run->points[i].raw_dbm));
    }
    EXPECT_GT(largest, 1.0) << serials[u];
    expect_truth_inside_and_same_verdict(sim, *run, c, recipe);
  }
}

// The same recipe on a bench without a switch: the calibration prompts for each standard, and
// each test stops after its direct sweep with a prompt for DUT-OFFSET, the unit behind the kit's
// offset line, fitted by hand. The line's connection is then made anew for every unit, so the
// calibration's copy of the line carries its repeatability at the coverage factor on top of the
// kit's match (sim-kit: 39 dB, 0.01122, + 3 × 0.001 = 0.01422). Answered, the second sweep runs
// and every point's interval holds the truth; answered without the line fitted, the unit is
// judged on the direct reading alone, the truth still inside; answered "not connected", the run
// is stored as aborted with the reason, never judged on the direct reading.
TEST(DaemonOffsetPair, WithoutTheSwitchArmTheOperatorFitsTheLine) {
  testing::TempDir dir("echoline-daemon-offset-hand");
  Sim sim("tiny-lot.jsonc", "instant.jsonc");
  const auto config = write_station_config(dir.path(), sim, "whip915-pair.jsonc");
  std::optional<Daemon> daemon;
  daemon.emplace(config);
  Api api = Api::connect(*daemon);
  json cal = calibrate(api, sim);
  ASSERT_EQ(cal["event"], "result") << cal.dump().substr(0, 400);
  ASSERT_TRUE(cal["calibration"]["valid"].get<bool>()) << cal.dump().substr(0, 400);
  // How the operator answers the prompt: fits the line, answers without fitting it, or says no.
  enum class Answer { fit, forget, refuse };
  auto run_unit = [&](const std::string& serial, Answer answer, int& prompts) {
    sim.connect_unit(serial);
    json r = api.call("test.start", {{"serial", serial}, {"lot", "TINY"}, {"operator", "e2e"}});
    if (!r.value("ok", false)) throw std::runtime_error("test.start refused: " + r.dump());
    for (;;) {
      json e = api.next_event();
      if (e["event"] == "progress") continue;
      if (e["event"] == "prompt") {
        ++prompts;
        EXPECT_EQ(e["standard"], "DUT-OFFSET") << e.dump();
        EXPECT_NE(e.value("message", "").find("offset line"), std::string::npos) << e.dump();
        if (answer == Answer::fit) {
          json c = sim.control({{"cmd", "connect"}, {"unit", serial}, {"via", "offset-line"}});
          EXPECT_TRUE(c.value("ok", false)) << c.dump();
        }
        json a = api.call("cal.answer", {{"standard", "DUT-OFFSET"}, {"connected", answer != Answer::refuse}});
        EXPECT_TRUE(a.value("ok", false)) << a.dump();
        continue;
      }
      if (e["event"] == "result") return e["run"];
      throw std::runtime_error("unexpected event: " + e.dump());
    }
  };
  const std::vector<std::string> serials = {"TINY-01", "TINY-02", "TINY-03"};
  std::vector<std::string> run_ids;
  for (const std::string& s : serials) {
    int prompts = 0;
    json run = run_unit(s, Answer::fit, prompts);
    EXPECT_EQ(prompts, 1) << s;
    EXPECT_NE(run["verdict"], "aborted") << run.dump().substr(0, 400);
    run_ids.push_back(run["run_id"]);
  }
  // Answered without fitting the line: the second reading is the direct one again, and the unit
  // is judged on the direct reading alone (the pair's intervals would miss the truth).
  int prompts = 0;
  json forgot = run_unit("TINY-05", Answer::forget, prompts);
  EXPECT_EQ(prompts, 1);
  EXPECT_NE(forgot["verdict"], "aborted") << forgot.dump().substr(0, 400);
  EXPECT_NE(forgot.value("reason", "").find("is the direct one again"), std::string::npos) << forgot.dump().substr(0, 400);
  const std::string forgot_id = forgot["run_id"];
  prompts = 0;
  json refused = run_unit("TINY-04", Answer::refuse, prompts);
  EXPECT_EQ(prompts, 1);
  EXPECT_EQ(refused["verdict"], "aborted") << refused.dump().substr(0, 400);
  EXPECT_NE(refused.value("reason", "").find("second reading not taken"), std::string::npos) << refused.dump().substr(0, 400);
  auto [store, c] = stop_and_open_store(daemon, dir.path());
  ASSERT_TRUE(c.budget.offset_line.has_value());
  // 39 dB return loss is |S11| = 10^(−39/20) = 0.011220 (definition of return loss).
  EXPECT_NEAR(c.budget.offset_line->match, 0.011220 + 3 * 0.001, 2e-6);
  const core::Recipe recipe = core::load_recipe(testing::source_dir() / "config/recipes/whip915-pair.jsonc");
  for (std::size_t u = 0; u < run_ids.size(); ++u) {
    auto run = store->load_run(run_ids[u]);
    ASSERT_TRUE(run.ok()) << run.error().message;
    const std::vector<core::Reading> offset = core::offset_readings(*run);
    ASSERT_EQ(offset.size(), run->points.size()) << serials[u];
    // The second reading went through the line: behind this 35 dB coupler the half turn moves
    // it by several times the 0.03-0.05 dB reading noise somewhere (the parallelogram law).
    double largest = 0;
    for (std::size_t i = 0; i < offset.size(); ++i) {
      largest = std::max(largest, std::fabs(offset[i].raw_dbm - run->points[i].raw_dbm));
    }
    EXPECT_GT(largest, 0.3) << serials[u];
    expect_truth_inside_and_same_verdict(sim, *run, c, recipe);
  }
  auto forgot_run = store->load_run(forgot_id);
  ASSERT_TRUE(forgot_run.ok()) << forgot_run.error().message;
  expect_truth_inside_and_same_verdict(sim, *forgot_run, c, recipe);
}

}  // namespace
}  // namespace echoline::e2e
