// The outbox's counts (schema 9: kept by triggers, read by outbox_status instead of counting)
// equal the outbox's rows after queueing, forwarding from another connection (as the forwarder
// does), refusing, and after migrating a version 8 file that already holds an outbox.
#include <gtest/gtest.h>
#include <sqlite3.h>

#include <filesystem>
#include <string>

#include "daemon/store/run_store.hpp"
#include "tests/store/store_test_data.hpp"

namespace echoline::store {
namespace {

using testdata::make_run;

long long count_rows(const std::filesystem::path& file, const std::string& where) {
  sqlite3* db = nullptr;
  EXPECT_EQ(sqlite3_open_v2(file.c_str(), &db, SQLITE_OPEN_READONLY, nullptr), SQLITE_OK);
  sqlite3_stmt* st = nullptr;
  const std::string sql = "SELECT count(*) FROM outbox WHERE " + where;
  EXPECT_EQ(sqlite3_prepare_v2(db, sql.c_str(), -1, &st, nullptr), SQLITE_OK);
  long long n = -1;
  if (sqlite3_step(st) == SQLITE_ROW) n = sqlite3_column_int64(st, 0);
  sqlite3_finalize(st);
  sqlite3_close(db);
  return n;
}

void expect_counts_match(RunStore& store, const std::filesystem::path& file, const std::string& after) {
  SCOPED_TRACE(after);
  auto s = store.outbox_status();
  ASSERT_TRUE(s.ok()) << s.error().message;
  EXPECT_EQ(s->depth, count_rows(file, "refused IS NULL"));
  EXPECT_EQ(s->refused, count_rows(file, "refused IS NOT NULL"));
}

TEST(OutboxCounts, FollowQueueingForwardingFromAnotherConnectionAndRefusals) {
  const auto dir = testdata::temp_dir("outbox-counts");
  const auto file = dir / "runs.sqlite";
  {
    auto store = RunStore::open(file);
    ASSERT_TRUE(store.ok()) << store.error().message;
    auto forwarder = RunStore::open(file);   // a second connection, as the forwarder keeps
    ASSERT_TRUE(forwarder.ok()) << forwarder.error().message;
    expect_counts_match(**store, file, "an empty store");
    for (int i = 0; i < 5; ++i) ASSERT_TRUE((*store)->save_run(make_run("U" + std::to_string(i), "L", i, 915e6)).ok());
    ASSERT_TRUE((*store)->begin_run(make_run("U9", "L", 9, 915e6)).ok());   // not queued while in progress
    expect_counts_match(**store, file, "five runs and one in progress");
    EXPECT_EQ((*store)->outbox_status()->depth, 5);

    auto waiting = (*forwarder)->outbox_peek(3);
    ASSERT_TRUE(waiting.ok());
    ASSERT_EQ(waiting->size(), 3u);
    ASSERT_TRUE((*forwarder)->outbox_refuse((*waiting)[0].run_id, "other content under this id").ok());
    ASSERT_TRUE((*forwarder)->outbox_done({(*waiting)[1].run_id, (*waiting)[2].run_id}, "2026-03-02T09:00:00.000Z").ok());
    expect_counts_match(**store, file, "two forwarded and one refused by the other connection");
    EXPECT_EQ((*store)->outbox_status()->depth, 2);
    EXPECT_EQ((*store)->outbox_status()->refused, 1);

    ASSERT_TRUE((*store)->finalize_interrupted(kStoppedUnexpectedlyReason, "2026-03-02T09:01:00.000Z").ok());
    expect_counts_match(**store, file, "the run in progress finalized");
    EXPECT_EQ((*store)->outbox_status()->depth, 3);
  }

  // A version 8 file: the same outbox without the counts; opening it counts them once.
  {
    sqlite3* db = nullptr;
    ASSERT_EQ(sqlite3_open(file.c_str(), &db), SQLITE_OK);
    ASSERT_EQ(sqlite3_exec(db,
                           "DROP TRIGGER outbox_counts_insert; DROP TRIGGER outbox_counts_delete; "
                           "DROP TRIGGER outbox_counts_update; DROP TABLE outbox_counts; "
                           "ALTER TABLE forwarding DROP COLUMN unqueued_from_seq; "
                           "ALTER TABLE forwarding DROP COLUMN unqueued_since_utc; ALTER TABLE calibrations DROP COLUMN units_since_check; "
                           "ALTER TABLE readings DROP COLUMN offset_raw_dbm; "
                           "PRAGMA user_version = 8;",
                           nullptr, nullptr, nullptr),
              SQLITE_OK);
    sqlite3_close(db);
  }
  auto reopened = RunStore::open(file);
  ASSERT_TRUE(reopened.ok()) << reopened.error().message;
  expect_counts_match(**reopened, file, "migrating a version 8 file");
  EXPECT_EQ((*reopened)->outbox_status()->depth, 3);
  EXPECT_EQ((*reopened)->outbox_status()->refused, 1);
  reopened->reset();
  std::filesystem::remove_all(dir);
}

}  // namespace
}  // namespace echoline::store
