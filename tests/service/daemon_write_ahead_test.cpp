// Write-ahead runs: echolined is killed with SIGKILL in the middle of five unit tests, one after
// another, and started again on the same store each time. Every killed test must be on record as
// aborted ("daemon stopped unexpectedly"), counted as aborted and never as a tested unit.
#include <gtest/gtest.h>

#include <csignal>
#include <memory>
#include <optional>

#include "daemon/store/run_store.hpp"
#include "tests/core/e2e_station.hpp"

namespace echoline::e2e {
namespace {

TEST(WriteAheadRuns, FiveRunsKilledMidSweepAreStoredAsAbortedAfterTheRestart) {
  testing::TempDir dir("echoline-write-ahead");
  Sim sim("tiny-lot.jsonc");
  const auto config = write_station_config(dir.path(), sim);
  const std::string lot = "LOT-KILLED";
  const std::vector<std::string> serials = {"TINY-01", "TINY-02", "TINY-03", "TINY-04", "TINY-05"};

  auto daemon = std::make_unique<Daemon>(config);
  {
    Api api = Api::connect(*daemon);
    json cal = calibrate(api, sim);
    ASSERT_EQ(cal["event"], "result") << cal.dump();
  }

  std::vector<std::string> killed_run_ids;
  for (const auto& serial : serials) {
    sim.connect_unit(serial);
    // Every receiver reply 300 ms late: the 221-point sweep would take over a minute, so the kill
    // after its first progress event lands mid-sweep with RF on (300 ms < the profile's timeout).
    json armed = sim.control({{"cmd", "fault"}, {"role", "receiver"}, {"kind", "slow-reply"}, {"probability", 1},
                              {"seed", 1}, {"delay_ms", 300}});
    ASSERT_TRUE(armed.value("ok", false)) << armed.dump();
    {
      Api api = Api::connect(*daemon);
      json r = api.call("test.start", {{"serial", serial}, {"lot", lot}, {"operator", "kim"}});
      ASSERT_TRUE(r.value("ok", false)) << r.dump();
      json e = api.next_event();
      ASSERT_EQ(e["event"], "progress") << e.dump();
      // The run is already on record while it measures.
      json listed = api.call("runs.history", {{"serial", serial}});
      ASSERT_TRUE(listed.value("ok", false)) << listed.dump();
      ASSERT_EQ(listed["result"]["runs"].size(), 1u) << listed.dump();
      const json& in_progress = listed["result"]["runs"][0];
      EXPECT_EQ(in_progress["verdict"], "aborted");
      EXPECT_EQ(in_progress["reason"], std::string(store::kInProgressReason));
      killed_run_ids.push_back(in_progress["run_id"]);
    }
    EXPECT_EQ(daemon->process().kill_now(), -SIGKILL);
    json cleared = sim.control({{"cmd", "clear-faults"}});
    ASSERT_TRUE(cleared.value("ok", false)) << cleared.dump();
    daemon = std::make_unique<Daemon>(config);   // same config: same socket and store
  }

  // Through the API of the restarted daemon: five runs, all aborted with the reason.
  {
    Api api = Api::connect(*daemon);
    json listed = api.call("runs.lot", {{"lot", lot}});
    ASSERT_TRUE(listed.value("ok", false)) << listed.dump();
    const json& runs = listed["result"]["runs"];
    ASSERT_EQ(runs.size(), serials.size()) << listed.dump();
    for (std::size_t i = 0; i < runs.size(); ++i) {
      EXPECT_EQ(runs[i]["run_id"], killed_run_ids[i]);
      EXPECT_EQ(runs[i]["serial"], serials[i]);
      EXPECT_EQ(runs[i]["verdict"], "aborted") << runs[i].dump();
      EXPECT_EQ(runs[i]["reason"], std::string(store::kStoppedUnexpectedlyReason)) << runs[i].dump();
      EXPECT_EQ(runs[i]["lot"], lot);
      EXPECT_EQ(runs[i]["operator"], "kim");
      EXPECT_EQ(runs[i]["station"], "e2e-bench");
      EXPECT_FALSE(runs[i]["calibration_id"].get<std::string>().empty()) << runs[i].dump();
      EXPECT_FALSE(runs[i]["started_utc"].get<std::string>().empty()) << runs[i].dump();
    }
    // One unit tested to the end after the restarts: a finished run beside the aborted ones.
    json finished = test_unit(api, sim, "TINY-06", lot);
    EXPECT_NE(finished["verdict"], "aborted") << finished.dump();
  }
  EXPECT_EQ(daemon->process().terminate(), 0);

  auto store = store::RunStore::open(dir.path() / "data" / "e2e-bench.sqlite");
  ASSERT_TRUE(store.ok()) << store.error().message;
  auto left = (*store)->runs_in_progress();
  ASSERT_TRUE(left.ok());
  EXPECT_TRUE(left->empty());
  auto yield = (*store)->yield_by(store::YieldGroup::lot, lot);
  ASSERT_TRUE(yield.ok()) << yield.error().message;
  ASSERT_EQ(yield->size(), 1u);
  const auto& y = yield->front();
  EXPECT_EQ(y.runs, 6);
  EXPECT_EQ(y.runs_by_verdict.at("aborted"), 5);
  EXPECT_EQ(y.units_tested, 1) << "a killed test is not a tested unit";
  EXPECT_EQ(y.runs_by_verdict.at("fail") + y.runs_by_verdict.at("pass") + y.runs_by_verdict.at("inconclusive"), 1);
  for (const auto& id : killed_run_ids) {
    auto run = (*store)->load_run(id);
    ASSERT_TRUE(run.ok()) << run.error().message;
    EXPECT_EQ(run->verdict, core::Verdict::aborted);
    EXPECT_EQ(run->reason, store::kStoppedUnexpectedlyReason);
    EXPECT_NE(run->software.find("echolined"), std::string::npos) << run->software;
    EXPECT_FALSE(run->ended_utc.empty());
    EXPECT_EQ(run->recipe.name, "whip915");
  }
  for (const auto& serial : serials) {
    auto unit = (*store)->unit(serial);
    ASSERT_TRUE(unit.ok() && unit->has_value()) << serial;
    EXPECT_EQ(unit->value().run_count, 1) << serial;
    EXPECT_EQ(unit->value().last_verdict, "aborted") << serial;
  }
}

}  // namespace
}  // namespace echoline::e2e
