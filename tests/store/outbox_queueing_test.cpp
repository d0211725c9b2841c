// Queueing for the central database follows the station's config (set_central_configured): a
// station without one queues nothing however many runs it commits, and a station that gets one
// later queues, once and in store order, every run it committed meanwhile. Real SQLite files.
#include <gtest/gtest.h>
#include <sqlite3.h>

#include <filesystem>
#include <string>
#include <vector>

#include "daemon/store/run_store.hpp"
#include "tests/store/store_test_data.hpp"

namespace echoline::store {
namespace {

using testdata::make_run;

// Run ids in the outbox, in its order (refused ones included), read through a separate connection.
std::vector<std::string> outbox_rows(const std::filesystem::path& file) {
  sqlite3* db = nullptr;
  EXPECT_EQ(sqlite3_open_v2(file.c_str(), &db, SQLITE_OPEN_READONLY, nullptr), SQLITE_OK);
  sqlite3_stmt* st = nullptr;
  EXPECT_EQ(sqlite3_prepare_v2(db, "SELECT run_id FROM outbox ORDER BY seq", -1, &st, nullptr), SQLITE_OK);
  std::vector<std::string> ids;
  while (sqlite3_step(st) == SQLITE_ROW) ids.emplace_back(reinterpret_cast<const char*>(sqlite3_column_text(st, 0)));
  sqlite3_finalize(st);
  sqlite3_close(db);
  return ids;
}

std::string run_id(const std::string& serial, int index) { return make_run(serial, "L", index, 915e6, core::Verdict::pass,
                                                                           core::FailureClass::none, 3).run_id; }

Status save(RunStore& s, const std::string& serial, int index) {
  return s.save_run(make_run(serial, "L", index, 915e6, core::Verdict::pass, core::FailureClass::none, 3));
}

TEST(OutboxQueueing, StationWithoutCentralDatabaseQueuesNothingWhateverItCommits) {
  const auto dir = testdata::temp_dir("outbox-none");
  const auto file = dir / "runs.sqlite";
  auto st = RunStore::open(file);
  ASSERT_TRUE(st.ok()) << st.error().message;
  auto& s = **st;
  auto off = s.set_central_configured(false, "2026-03-02T07:00:00.000Z");
  ASSERT_TRUE(off.ok()) << off.error().message;
  EXPECT_EQ(off->unqueued, 0);
  for (int i = 0; i < 50; ++i) ASSERT_TRUE(save(s, "U" + std::to_string(i), i).ok());
  ASSERT_TRUE(s.begin_run(make_run("W", "L", 60, 915e6)).ok());
  ASSERT_TRUE(s.finalize_interrupted(kStoppedUnexpectedlyReason, "2026-03-02T09:00:00.000Z").ok());
  EXPECT_TRUE(outbox_rows(file).empty());
  auto status = s.outbox_status();
  ASSERT_TRUE(status.ok()) << status.error().message;
  EXPECT_EQ(status->depth, 0);
  EXPECT_FALSE(status->queueing);
  EXPECT_EQ(status->unqueued_since_utc, "2026-03-02T07:00:00.000Z");

  // A daemon restart without a central database says so again: still nothing queued, and the
  // time queueing stopped stays the first one.
  st->reset();
  auto again = RunStore::open(file);
  ASSERT_TRUE(again.ok()) << again.error().message;
  auto off2 = (*again)->set_central_configured(false, "2026-03-03T07:00:00.000Z");
  ASSERT_TRUE(off2.ok()) << off2.error().message;
  EXPECT_EQ(off2->unqueued, 0);
  EXPECT_EQ(off2->unqueued_since_utc, "2026-03-02T07:00:00.000Z");
  ASSERT_TRUE(save(**again, "U99", 99).ok());
  EXPECT_TRUE(outbox_rows(file).empty());
  again->reset();
  std::filesystem::remove_all(dir);
}

// A station with a central database that is unreachable keeps every run queued; the central
// database then leaves its config (runs waiting leave the outbox, refused ones stay), runs are
// committed without it, a run is left in progress, and a central database is configured again:
// every finished run not yet in the central database is queued once, in store order, and the run
// left in progress is queued when it is finalized.
TEST(OutboxQueueing, CentralDatabaseConfiguredLaterGetsEveryRunNotYetForwarded) {
  const auto dir = testdata::temp_dir("outbox-later");
  const auto file = dir / "runs.sqlite";
  auto st = RunStore::open(file);
  ASSERT_TRUE(st.ok()) << st.error().message;
  auto& s = **st;
  ASSERT_TRUE(s.set_central_configured(true, "2026-03-02T07:00:00.000Z").ok());
  for (int i = 0; i < 4; ++i) ASSERT_TRUE(save(s, "A" + std::to_string(i), i).ok());
  // The central database is unreachable: nothing forwarded, everything waits.
  EXPECT_EQ(outbox_rows(file).size(), 4u);
  // It took A0 and refused A1 (other content under its id).
  ASSERT_TRUE(s.outbox_done({run_id("A0", 0)}, "2026-03-02T08:10:00.000Z").ok());
  ASSERT_TRUE(s.outbox_refuse(run_id("A1", 1), "other content").ok());

  auto off = s.set_central_configured(false, "2026-03-02T08:30:00.000Z");
  ASSERT_TRUE(off.ok()) << off.error().message;
  EXPECT_EQ(off->unqueued, 2);   // A2, A3
  EXPECT_EQ(outbox_rows(file), std::vector<std::string>{run_id("A1", 1)});   // the refusal is kept
  EXPECT_EQ(s.outbox_status()->depth, 0);
  EXPECT_EQ(s.outbox_status()->refused, 1);
  for (int i = 10; i < 13; ++i) ASSERT_TRUE(save(s, "B" + std::to_string(i), i).ok());
  ASSERT_TRUE(s.begin_run(make_run("C", "L", 20, 915e6)).ok());
  EXPECT_EQ(outbox_rows(file).size(), 1u);

  auto on = s.set_central_configured(true, "2026-03-02T09:00:00.000Z");
  ASSERT_TRUE(on.ok()) << on.error().message;
  EXPECT_EQ(on->queued, 5);
  EXPECT_EQ(on->unqueued_since_utc, "2026-03-02T08:30:00.000Z");
  const std::vector<std::string> expected = {run_id("A1", 1),   run_id("A2", 2),   run_id("A3", 3),
                                             run_id("B10", 10), run_id("B11", 11), run_id("B12", 12)};
  EXPECT_EQ(outbox_rows(file), expected);
  auto status = s.outbox_status();
  EXPECT_TRUE(status->queueing);
  EXPECT_EQ(status->unqueued_since_utc, "");
  EXPECT_EQ(status->depth, 5);
  EXPECT_EQ(status->oldest_run_id, run_id("A2", 2));

  auto fin = s.finalize_interrupted(kStoppedUnexpectedlyReason, "2026-03-02T09:01:00.000Z");
  ASSERT_TRUE(fin.ok());
  ASSERT_EQ(fin->size(), 1u);
  EXPECT_EQ(outbox_rows(file).back(), fin->front());
  // Saying so again queues nothing twice.
  auto on2 = s.set_central_configured(true, "2026-03-02T09:05:00.000Z");
  ASSERT_TRUE(on2.ok());
  EXPECT_EQ(on2->queued, 0);
  EXPECT_EQ(s.outbox_status()->depth, 6);
  st->reset();
  std::filesystem::remove_all(dir);
}

// A version 9 file of a station without a central database holds every run in its outbox (runs
// were always queued): after migrating, saying there is no central database empties it, and a
// central database configured later still gets all of them.
TEST(OutboxQueueing, UpgradedStationWithoutCentralDatabaseDropsItsStuckOutboxWithoutLosingRuns) {
  const auto dir = testdata::temp_dir("outbox-upgrade");
  const auto file = dir / "runs.sqlite";
  {
    auto st = RunStore::open(file);
    ASSERT_TRUE(st.ok()) << st.error().message;
    for (int i = 0; i < 6; ++i) ASSERT_TRUE(save(**st, "U" + std::to_string(i), i).ok());
  }
  {
    sqlite3* db = nullptr;
    ASSERT_EQ(sqlite3_open(file.c_str(), &db), SQLITE_OK);
    ASSERT_EQ(sqlite3_exec(db,
                           "ALTER TABLE forwarding DROP COLUMN unqueued_from_seq; "
                           "ALTER TABLE forwarding DROP COLUMN unqueued_since_utc; ALTER TABLE calibrations DROP COLUMN units_since_check; "
                           "ALTER TABLE readings DROP COLUMN offset_raw_dbm; "
                           "PRAGMA user_version = 9;",
                           nullptr, nullptr, nullptr),
              SQLITE_OK);
    sqlite3_close(db);
  }
  auto st = RunStore::open(file);
  ASSERT_TRUE(st.ok()) << st.error().message;
  EXPECT_EQ(outbox_rows(file).size(), 6u);
  auto off = (*st)->set_central_configured(false, "2026-03-02T10:00:00.000Z");
  ASSERT_TRUE(off.ok()) << off.error().message;
  EXPECT_EQ(off->unqueued, 6);
  EXPECT_TRUE(outbox_rows(file).empty());
  auto on = (*st)->set_central_configured(true, "2026-03-02T11:00:00.000Z");
  ASSERT_TRUE(on.ok()) << on.error().message;
  EXPECT_EQ(on->queued, 6);
  EXPECT_EQ(outbox_rows(file).front(), run_id("U0", 0));
  st->reset();
  std::filesystem::remove_all(dir);
}

}  // namespace
}  // namespace echoline::store
