// echolined against a real echoline-sim: a check standard that drifted makes the calibration due,
// and it stays due after the daemon is stopped and started again on the same run store.
// The drift is made the way it happens at a bench: when the daemon asks for the OPEN check
// standard, something else (the LOAD) is on the test port.
#include <fstream>
#include <iterator>

#include <gtest/gtest.h>

#include "tests/core/e2e_station.hpp"

namespace echoline::e2e {
namespace {

// cal.check, answering its prompt with `connected` on the test port instead of the standard asked for.
json check_with(Api& api, Sim& sim, const std::string& connected) {
  json r = api.call("cal.check");
  if (!r.value("ok", false)) throw std::runtime_error("cal.check refused: " + r.dump());
  for (;;) {
    json e = api.next_event();
    const std::string kind = e["event"];
    if (kind == "prompt") {
      sim.connect_standard(connected);
      (void)api.call("cal.answer", {{"standard", e["standard"]}});
    } else if (kind == "result" || kind == "error") {
      return e;
    }
  }
}

TEST(DaemonCheckStandard, DriftedCheckStandardKeepsCalibrationDueAcrossRestart) {
  testing::TempDir dir{"echoline-check-drift"};
  Sim sim("tiny-lot.jsonc");
  const auto config = write_station_config(dir.path(), sim);
  std::optional<Daemon> daemon(std::in_place, config);
  std::optional<Api> api(Api::connect(*daemon));

  json cal = calibrate(*api, sim);
  ASSERT_EQ(cal["event"], "result") << cal.dump();
  ASSERT_TRUE(cal["calibration"]["valid"].get<bool>()) << cal.dump();
  ASSERT_FALSE(api->call("cal.status")["result"]["due"].get<bool>());

  // The same check standard as at calibration: no drift, calibration still in force.
  json same = check_with(*api, sim, "OPEN");
  ASSERT_EQ(same["event"], "result") << same.dump();
  EXPECT_FALSE(same["check"]["drifted"].get<bool>()) << same.dump();

  // A LOAD where the OPEN should be: a drift far beyond any limit.
  json drift = check_with(*api, sim, "LOAD");
  ASSERT_EQ(drift["event"], "result") << drift.dump();
  ASSERT_TRUE(drift["check"]["drifted"].get<bool>()) << drift.dump();
  json status = api->call("cal.status")["result"];
  EXPECT_TRUE(status["due"].get<bool>()) << status.dump();

  // Stop and start the daemon on the same store: the calibration must not come back as valid.
  api.reset();
  EXPECT_EQ(daemon->process().terminate(10s), 0);
  daemon.emplace(config);
  api.emplace(Api::connect(*daemon));
  status = api->call("cal.status")["result"];
  EXPECT_TRUE(status["due"].get<bool>()) << status.dump();
  EXPECT_NE(status["reason"].get<std::string>().find("check standard drifted"), std::string::npos) << status.dump();
  sim.connect_unit(sim.units().front());
  json refused = api->call("test.start", {{"serial", sim.units().front()}, {"lot", "L"}});
  ASSERT_FALSE(refused["ok"].get<bool>()) << refused.dump();
  EXPECT_EQ(refused["error"]["code"], "calibration_due") << refused.dump();

  // A new calibration clears it, and that one survives a restart as valid.
  cal = calibrate(*api, sim);
  ASSERT_EQ(cal["event"], "result") << cal.dump();
  EXPECT_FALSE(api->call("cal.status")["result"]["due"].get<bool>());
  api.reset();
  EXPECT_EQ(daemon->process().terminate(10s), 0);
  daemon.emplace(config);
  api.emplace(Api::connect(*daemon));
  status = api->call("cal.status")["result"];
  EXPECT_FALSE(status["due"].get<bool>()) << status.dump();
  EXPECT_EQ(daemon->process().terminate(10s), 0);
}

// The check standard falls due every N units judged (recipe calibration.check_every_units); a
// restart must not start that count again, or a bench restarted now and then (a watchdog, a
// nightly restart) would never measure it. Here N = 3: two units, a restart, one more unit, and
// the next test is refused until the check standard is measured.
TEST(DaemonCheckStandard, TheUnitsSinceTheCheckStandardSurviveARestart) {
  testing::TempDir dir{"echoline-check-count"};
  Sim sim("tiny-lot.jsonc");
  std::ifstream in(testing::source_dir() / "config/recipes/whip915.jsonc");
  std::string recipe((std::istreambuf_iterator<char>(in)), std::istreambuf_iterator<char>());
  const std::string every = "\"check_every_units\": 50";
  ASSERT_NE(recipe.find(every), std::string::npos);
  recipe.replace(recipe.find(every), every.size(), "\"check_every_units\": 3");
  const auto recipe_file = dir.path() / "whip915-check3.jsonc";
  std::ofstream(recipe_file) << recipe;
  const auto config = write_station_config(dir.path(), sim, recipe_file.string());
  std::optional<Daemon> daemon(std::in_place, config);
  std::optional<Api> api(Api::connect(*daemon));
  ASSERT_EQ(calibrate(*api, sim)["event"], "result");
  const std::vector<std::string> units = sim.units();
  ASSERT_GE(units.size(), 4u);
  for (int i = 0; i < 2; ++i) {
    json run = test_unit(*api, sim, units[i], "L");
    ASSERT_NE(run.value("verdict", ""), "aborted") << run.dump();
  }
  EXPECT_EQ(api->call("cal.status")["result"]["check"]["units_since"], 2);

  api.reset();
  EXPECT_EQ(daemon->process().terminate(10s), 0);
  daemon.emplace(config);
  api.emplace(Api::connect(*daemon));
  EXPECT_EQ(api->call("cal.status")["result"]["check"]["units_since"], 2) << "the count started again";
  json third = test_unit(*api, sim, units[2], "L");
  ASSERT_NE(third.value("verdict", ""), "aborted") << third.dump();
  sim.connect_unit(units[3]);
  json refused = api->call("test.start", {{"serial", units[3]}, {"lot", "L"}});
  ASSERT_FALSE(refused.value("ok", true)) << refused.dump();
  EXPECT_EQ(refused["error"]["code"], "check_due") << refused.dump();
  // Measured, it starts again from 0, also across a restart.
  ASSERT_EQ(check_with(*api, sim, "OPEN")["event"], "result");
  api.reset();
  EXPECT_EQ(daemon->process().terminate(10s), 0);
  daemon.emplace(config);
  api.emplace(Api::connect(*daemon));
  EXPECT_EQ(api->call("cal.status")["result"]["check"]["units_since"], 0);
  EXPECT_EQ(daemon->process().terminate(10s), 0);
}

}  // namespace
}  // namespace echoline::e2e
