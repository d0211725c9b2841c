// One daemon per station store: a second echolined started on the same config while the first
// measures a unit stops before it touches the store or an instrument. The first daemon's run
// then finishes as measured, not as "aborted (daemon stopped unexpectedly)".
#include <gtest/gtest.h>

#include <chrono>
#include <fstream>
#include <iterator>
#include <string>

#include "tests/core/e2e_station.hpp"

namespace echoline::e2e {
namespace {

TEST(SingleInstance, ASecondDaemonOnTheSameStoreStopsWithoutDisturbingTheRunningTest) {
  testing::TempDir dir("echoline-single");
  Sim sim("tiny-lot.jsonc");
  const auto config = write_station_config(dir.path(), sim);
  Daemon first(config);
  Api api = Api::connect(first);
  ASSERT_EQ(calibrate(api, sim)["event"], "result");

  sim.connect_unit("TINY-01");
  // Every receiver reply 300 ms late, so the second daemon starts while the sweep is under way.
  json armed = sim.control({{"cmd", "fault"}, {"role", "receiver"}, {"kind", "slow-reply"}, {"probability", 1},
                            {"seed", 1}, {"delay_ms", 300}});
  ASSERT_TRUE(armed.value("ok", false)) << armed.dump();
  json started = api.call("test.start", {{"serial", "TINY-01"}, {"lot", "LOT-ONE"}, {"operator", "kim"}});
  ASSERT_TRUE(started.value("ok", false)) << started.dump();
  ASSERT_EQ(api.next_event()["event"], "progress");

  // Another socket path, so only the store's lock can tell it that a daemon runs here.
  const testing::Outcome second = testing::run_to_end(
      {testing::daemon_binary().string(), "--config", config.string(), "--socket", (dir / "other.sock").string(),
       "--log-level", "warn", "--no-log-file"});
  EXPECT_EQ(second.code, 1) << second.output;   // README, "Exit codes": 1 runtime failure
  EXPECT_NE(second.output.find("another echolined (pid " + std::to_string(first.process().pid()) + ")"),
            std::string::npos)
      << second.output;
  EXPECT_NE(second.output.find("e2e-bench.lock"), std::string::npos) << second.output;
  // Started with the same log folder at level info, it leaves the first one's log alone: the
  // first daemon logs at warn, so no "starting" line may appear there (the lock is taken before
  // the log is opened).
  const testing::Outcome third = testing::run_to_end(
      {testing::daemon_binary().string(), "--config", config.string(), "--socket", (dir / "third.sock").string(),
       "--log-level", "info"});
  EXPECT_EQ(third.code, 1) << third.output;
  std::ifstream log_file(dir / "log" / "echolined.log");
  const std::string log((std::istreambuf_iterator<char>(log_file)), std::istreambuf_iterator<char>());
  std::size_t starts = 0;
  for (std::size_t at = log.find(" starting: station "); at != std::string::npos; at = log.find(" starting: station ", at + 1)) ++starts;
  EXPECT_EQ(starts, 0u) << log;

  json cleared = sim.control({{"cmd", "clear-faults"}});
  ASSERT_TRUE(cleared.value("ok", false)) << cleared.dump();
  json e;
  do {
    e = api.next_event(std::chrono::seconds(120));
  } while (e.value("event", "") == "progress");
  ASSERT_EQ(e["event"], "result") << e.dump();
  EXPECT_NE(e["result"]["verdict"], "aborted") << e.dump();
  json listed = api.call("runs.history", {{"serial", "TINY-01"}});
  ASSERT_TRUE(listed.value("ok", false)) << listed.dump();
  ASSERT_EQ(listed["result"]["runs"].size(), 1u) << listed.dump();
  EXPECT_NE(listed["result"]["runs"][0]["verdict"], "aborted") << listed.dump();
}

}  // namespace
}  // namespace echoline::e2e
