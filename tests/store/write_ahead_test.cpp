// Write-ahead runs in the store: a run recorded as started before it measures, replaced by its
// finished run in one transaction, or finalized as aborted when a new daemon finds it in progress.
#include <gtest/gtest.h>

#include "daemon/store/run_store.hpp"
#include "tests/store/store_test_data.hpp"

namespace echoline::store {
namespace {

using testdata::make_run;

class WriteAheadTest : public ::testing::Test {
 protected:
  void SetUp() override {
    dir_ = testdata::temp_dir("write-ahead");
    store_ = open();
  }
  void TearDown() override {
    store_.reset();
    std::filesystem::remove_all(dir_);
  }
  std::unique_ptr<RunStore> open() {
    auto s = RunStore::open(dir_ / "station.db");
    EXPECT_TRUE(s.ok()) << s.error().message;
    return s.ok() ? std::move(*s) : nullptr;
  }
  std::filesystem::path dir_;
  std::unique_ptr<RunStore> store_;
};

TEST_F(WriteAheadTest, AStartedRunIsOnRecordAsAbortedInProgressWithItsIdentity) {
  auto run = make_run("WH915A-0001", "L1", 0, 915e6);
  run.points.clear();
  run.software = "echolined 0.2.0 (gabc1234)";
  ASSERT_TRUE(store_->begin_run(run).ok());
  auto back = store_->load_run(run.run_id);
  ASSERT_TRUE(back.ok()) << back.error().message;
  EXPECT_EQ(back->verdict, core::Verdict::aborted);
  EXPECT_EQ(back->reason, kInProgressReason);
  EXPECT_EQ(back->serial, run.serial);
  EXPECT_EQ(back->lot, "L1");
  EXPECT_EQ(back->calibration_id, run.calibration_id);
  EXPECT_EQ(back->operator_name, run.operator_name);
  EXPECT_EQ(back->software, run.software);
  EXPECT_EQ(back->started_utc, run.started_utc);
  auto ids = store_->runs_in_progress();
  ASSERT_TRUE(ids.ok());
  EXPECT_EQ(*ids, std::vector<std::string>{run.run_id});
}

TEST_F(WriteAheadTest, TheFinishedRunReplacesItsStartRecordWithoutCountingTwice) {
  auto before = make_run("WH915A-0001", "L1", 0, 915e6);
  ASSERT_TRUE(store_->save_run(before).ok());
  auto run = make_run("WH915A-0001", "L1", 1, 915e6, core::Verdict::fail, core::FailureClass::tuned_low);
  auto started = run;
  started.points.clear();
  ASSERT_TRUE(store_->begin_run(started).ok());
  auto after = make_run("WH915A-0002", "L1", 2, 915e6);
  ASSERT_TRUE(store_->save_run(after).ok());
  ASSERT_TRUE(store_->save_run(run).ok());

  auto history = store_->history("WH915A-0001", true);
  ASSERT_TRUE(history.ok());
  ASSERT_EQ(history->size(), 2u);
  EXPECT_EQ(history->back().run_id, run.run_id);
  EXPECT_EQ(history->back().verdict, core::Verdict::fail);
  EXPECT_EQ(history->back().points.size(), run.points.size());
  auto unit = store_->unit("WH915A-0001");
  ASSERT_TRUE(unit.ok() && unit->has_value());
  EXPECT_EQ(unit->value().run_count, 2);
  EXPECT_EQ(unit->value().last_verdict, "fail");
  auto ids = store_->runs_in_progress();
  ASSERT_TRUE(ids.ok());
  EXPECT_TRUE(ids->empty());
  // The finished run keeps its start record's place: lot order is still by start, then insertion.
  auto lot = store_->lot_runs("L1", false);
  ASSERT_TRUE(lot.ok());
  ASSERT_EQ(lot->size(), 3u);
  EXPECT_EQ((*lot)[1].run_id, run.run_id);
  // A finished run cannot be saved twice, and a start cannot be recorded twice.
  EXPECT_FALSE(store_->save_run(run).ok());
  EXPECT_FALSE(store_->begin_run(started).ok());
}

TEST_F(WriteAheadTest, ARunLeftInProgressIsFinalizedAsAbortedOnTheNextOpen) {
  auto run = make_run("WH915A-0003", "L2", 0, 915e6);
  run.points.clear();
  ASSERT_TRUE(store_->begin_run(run).ok());
  store_.reset();   // the daemon "dies": nothing else happens to the run

  store_ = open();
  ASSERT_TRUE(store_);
  auto done = store_->finalize_interrupted(kStoppedUnexpectedlyReason, "2026-03-02T09:00:00.000Z");
  ASSERT_TRUE(done.ok()) << done.error().message;
  EXPECT_EQ(*done, std::vector<std::string>{run.run_id});
  auto back = store_->load_run(run.run_id);
  ASSERT_TRUE(back.ok());
  EXPECT_EQ(back->verdict, core::Verdict::aborted);
  EXPECT_EQ(back->reason, kStoppedUnexpectedlyReason);
  EXPECT_EQ(back->ended_utc, "2026-03-02T09:00:00.000Z");
  auto again = store_->finalize_interrupted(kStoppedUnexpectedlyReason, "2026-03-02T09:00:01.000Z");
  ASSERT_TRUE(again.ok());
  EXPECT_TRUE(again->empty());

  auto y = store_->yield_by(YieldGroup::lot, "L2");
  ASSERT_TRUE(y.ok());
  ASSERT_EQ(y->size(), 1u);
  EXPECT_EQ(y->front().runs_by_verdict.at("aborted"), 1);
  EXPECT_EQ(y->front().units_tested, 0);
  // Once finalized it is an ordinary stored run: its id cannot be finished any more.
  EXPECT_FALSE(store_->save_run(make_run("WH915A-0003", "L2", 0, 915e6)).ok());
}

TEST_F(WriteAheadTest, AStartForAnInvalidSerialStoresNothing) {
  auto run = make_run("bad/serial", "L1", 0, 915e6);
  EXPECT_FALSE(store_->begin_run(run).ok());
  auto ids = store_->runs_in_progress();
  ASSERT_TRUE(ids.ok());
  EXPECT_TRUE(ids->empty());
}

}  // namespace
}  // namespace echoline::store
