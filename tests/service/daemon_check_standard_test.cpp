// echolined against a real echoline-sim: a check standard that drifted makes the calibration due,
// and it stays due after the daemon is stopped and started again on the same run store.
// The drift is made the way it happens at a bench: when the daemon asks for the OPEN check
// standard, something else (the LOAD) is on the test port.
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

}  // namespace
}  // namespace echoline::e2e
