// RunStore::live_yield, the yield /metrics reads without counting the store again: after every
// kind of write (saves, retests, a run started earlier than one already stored, write-ahead
// records and their replacement, runs finalized after a crash, refused saves, another station's
// runs) it equals a full count (yield_by), and a reopened store counts the same.
#include <gtest/gtest.h>

#include <filesystem>

#include "daemon/store/run_store.hpp"
#include "tests/store/store_test_data.hpp"

namespace echoline::store {
namespace {

using core::FailureClass;
using core::Verdict;
using testdata::make_run;

constexpr const char* kStation = "line2-bench1";   // testdata::make_run's station

YieldSummary counted(RunStore& store) {
  auto y = store.yield_by(YieldGroup::station, kStation);
  EXPECT_TRUE(y.ok());
  return y.ok() && !y->empty() ? y->front() : YieldSummary{};
}

void expect_same(const YieldSummary& live, const YieldSummary& full, const std::string& after) {
  SCOPED_TRACE(after);
  EXPECT_EQ(live.group, full.group);
  EXPECT_EQ(live.runs, full.runs);
  EXPECT_EQ(live.runs_by_verdict, full.runs_by_verdict);
  EXPECT_EQ(live.runs_by_class, full.runs_by_class);
  EXPECT_EQ(live.units_tested, full.units_tested);
  EXPECT_EQ(live.units_first_pass, full.units_first_pass);
  EXPECT_EQ(live.units_final_pass, full.units_final_pass);
  EXPECT_DOUBLE_EQ(live.first_pass_yield, full.first_pass_yield);
  EXPECT_DOUBLE_EQ(live.final_yield, full.final_yield);
}

class LiveYieldTest : public ::testing::Test {
 protected:
  void SetUp() override {
    dir_ = testdata::temp_dir("live-yield");
    open();
  }
  void TearDown() override {
    store_.reset();
    std::filesystem::remove_all(dir_);
  }
  void open() {
    store_.reset();
    auto s = RunStore::open(dir_ / "runs.sqlite");
    ASSERT_TRUE(s.ok()) << s.error().message;
    store_ = std::move(*s);
  }
  YieldSummary live() {
    auto y = store_->live_yield(YieldGroup::station, kStation);
    EXPECT_TRUE(y.ok()) << (y.ok() ? "" : y.error().message);
    return y.ok() ? *y : YieldSummary{};
  }
  void check(const std::string& after) { expect_same(live(), counted(*store_), after); }

  std::filesystem::path dir_;
  std::unique_ptr<RunStore> store_;
};

TEST_F(LiveYieldTest, EqualsAFullCountAfterEveryKindOfWrite) {
  check("an empty store");
  EXPECT_EQ(live().runs, 0);

  ASSERT_TRUE(store_->save_run(make_run("U1", "L1", 10, 915e6)).ok());
  check("a first pass");
  ASSERT_TRUE(store_->save_run(make_run("U2", "L1", 11, 935e6, Verdict::fail, FailureClass::tuned_high)).ok());
  ASSERT_TRUE(store_->save_run(make_run("U2", "L1", 12, 915e6)).ok());
  check("a fail, then its retest passing");
  ASSERT_TRUE(store_->save_run(make_run("U3", "L1", 13, 900e6, Verdict::inconclusive, FailureClass::tuned_low)).ok());
  ASSERT_TRUE(store_->save_run(make_run("U3", "L1", 14, 915e6, Verdict::aborted)).ok());
  check("an inconclusive run, then an aborted one");

  // A run of U1 that started before the one already stored: it becomes U1's first run.
  ASSERT_TRUE(store_->save_run(make_run("U1", "L1", 5, 900e6, Verdict::fail, FailureClass::tuned_low)).ok());
  check("a run stored after a later one of the same unit");
  EXPECT_EQ(live().units_first_pass, 0);   // U1 failed first, U2 failed first, U3 has no pass
  EXPECT_EQ(live().units_final_pass, 2);

  // Write-ahead record, then the finished run replacing it.
  core::RunResult u4 = make_run("U4", "L2", 20, 935e6, Verdict::fail, FailureClass::tuned_high);
  ASSERT_TRUE(store_->begin_run(u4).ok());
  check("a run in progress");
  EXPECT_EQ(live().runs_by_verdict.at("aborted"), 2);
  ASSERT_TRUE(store_->save_run(u4).ok());
  check("the finished run replacing its write-ahead record");
  EXPECT_EQ(live().runs_by_verdict.at("aborted"), 1);

  // Runs left in progress by a daemon that died: finalized as aborted.
  ASSERT_TRUE(store_->begin_run(make_run("U5", "L2", 21, 915e6)).ok());
  ASSERT_TRUE(store_->begin_run(make_run("U1", "L2", 22, 915e6)).ok());
  auto finalized = store_->finalize_interrupted(kStoppedUnexpectedlyReason, "2026-03-02T09:00:00.000Z");
  ASSERT_TRUE(finalized.ok());
  EXPECT_EQ(finalized->size(), 2u);
  check("runs finalized after a crash");

  // Refused writes change nothing.
  EXPECT_FALSE(store_->save_run(make_run("U2", "L1", 12, 915e6)).ok());          // run id already stored
  EXPECT_FALSE(store_->save_run(make_run("bad serial!", "L1", 30, 915e6)).ok());  // serial refused
  check("refused saves");

  // Another station's runs in the same file are not this station's.
  core::RunResult other = make_run("U6", "L1", 31, 915e6);
  other.station = "line3-bench2";
  ASSERT_TRUE(store_->save_run(other).ok());
  check("another station's run");
  EXPECT_EQ(live().units_tested, 4);   // U1..U4; U5 never finished a run

  const YieldSummary before = live();
  open();   // what a restarted daemon sees
  expect_same(live(), before, "reopening the store");
  check("reopening the store");
  ASSERT_TRUE(store_->save_run(make_run("U5", "L2", 40, 915e6)).ok());
  check("a run after reopening");
  EXPECT_EQ(live().units_tested, 5);
}

TEST_F(LiveYieldTest, AnotherGroupIsCountedAfreshAndAnEmptyNameIsRefused) {
  ASSERT_TRUE(store_->save_run(make_run("U1", "L1", 1, 915e6)).ok());
  EXPECT_EQ(live().runs, 1);
  auto lot = store_->live_yield(YieldGroup::lot, "L1");
  ASSERT_TRUE(lot.ok());
  EXPECT_EQ(lot->group, "L1");
  EXPECT_EQ(lot->runs, 1);
  ASSERT_TRUE(store_->save_run(make_run("U2", "L1", 2, 915e6)).ok());
  EXPECT_EQ(store_->live_yield(YieldGroup::lot, "L1")->runs, 2);
  EXPECT_EQ(live().runs, 2);
  EXPECT_FALSE(store_->live_yield(YieldGroup::station, "").ok());
}

}  // namespace
}  // namespace echoline::store
