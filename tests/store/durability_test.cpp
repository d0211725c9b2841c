// Durability on real files: a writer SIGKILLed mid-stream loses nothing it reported committed and
// leaves no half-written run; a full database refuses the run cleanly. Also prints commit rates.
#include <fcntl.h>
#include <gtest/gtest.h>
#include <signal.h>
#include <sqlite3.h>
#include <sys/wait.h>
#include <unistd.h>

#include <chrono>
#include <cstdio>
#include <set>
#include <string>

#include "daemon/store/run_store.hpp"
#include "tests/store/store_test_data.hpp"

namespace echoline::store {
namespace {

long long count(const std::filesystem::path& file, const char* sql) {
  sqlite3* db = nullptr;
  sqlite3_open(file.c_str(), &db);
  sqlite3_stmt* st = nullptr;
  long long n = -1;
  if (sqlite3_prepare_v2(db, sql, -1, &st, nullptr) == SQLITE_OK && sqlite3_step(st) == SQLITE_ROW) n = sqlite3_column_int64(st, 0);
  sqlite3_finalize(st);
  sqlite3_close(db);
  return n;
}

TEST(StoreDurability, KilledWriterLosesNoReportedRunAndLeavesNoPartialRun) {
  const auto dir = testdata::temp_dir("kill");
  const auto file = dir / "station.db";
  { auto s = RunStore::open(file); ASSERT_TRUE(s.ok()); }
  int fds[2];
  ASSERT_EQ(::pipe(fds), 0);
  const pid_t child = ::fork();
  ASSERT_GE(child, 0);
  if (child == 0) {
    ::close(fds[0]);
    auto s = RunStore::open(file);
    if (!s.ok()) ::_exit(3);
    for (int i = 0; i < 1000000; ++i) {
      const auto run = testdata::make_run("K" + std::to_string(i % 25), "LK", i % 80000, 915e6);
      auto copy = run;
      copy.run_id = "kill-" + std::to_string(i);
      if (!(*s)->save_run(copy).ok()) ::_exit(4);
      // Reported only after save_run returned (the COMMIT is on disk with synchronous=FULL).
      const std::string line = copy.run_id + "\n";
      if (::write(fds[1], line.data(), line.size()) != static_cast<ssize_t>(line.size())) ::_exit(5);
    }
    ::_exit(0);
  }
  ::close(fds[1]);
  std::FILE* in = ::fdopen(fds[0], "r");
  std::set<std::string> reported;
  char buf[256];
  while (reported.size() < 60 && std::fgets(buf, sizeof buf, in)) {
    std::string id(buf);
    id.pop_back();
    reported.insert(id);
  }
  ASSERT_EQ(::kill(child, SIGKILL), 0);
  while (std::fgets(buf, sizeof buf, in)) {   // lines written before the kill
    std::string id(buf);
    if (!id.empty() && id.back() == '\n') { id.pop_back(); reported.insert(id); }
  }
  std::fclose(in);
  int status = 0;
  ::waitpid(child, &status, 0);
  ASSERT_TRUE(WIFSIGNALED(status)) << "the writer ended on its own (status " << status << ")";
  ASSERT_GE(reported.size(), 60u);

  auto s = RunStore::open(file);
  ASSERT_TRUE(s.ok()) << s.error().message;
  auto ok = (*s)->integrity_check();
  ASSERT_TRUE(ok.ok());
  EXPECT_EQ(*ok, "ok");
  for (const auto& id : reported) {
    auto r = (*s)->load_run(id);
    ASSERT_TRUE(r.ok()) << id << ": " << r.error().message;
    EXPECT_EQ(r->points.size(), 201u) << id;
  }
  EXPECT_GE(count(file, "SELECT count(*) FROM runs"), static_cast<long long>(reported.size()));
  EXPECT_EQ(count(file, "SELECT count(*) FROM runs r WHERE points_count <> "
                        "(SELECT count(*) FROM readings p WHERE p.run_id = r.run_id)"), 0);
  EXPECT_EQ(count(file, "SELECT sum(run_count) FROM units"), count(file, "SELECT count(*) FROM runs"));
  std::printf("[ info ] %zu runs reported committed before SIGKILL; %lld runs in the file\n", reported.size(),
              count(file, "SELECT count(*) FROM runs"));
  s->reset();
  std::filesystem::remove_all(dir);
}

TEST(StoreDurability, FullDatabaseGivesStorageErrorAndStoresNothingOfThatRun) {
  const auto dir = testdata::temp_dir("full");
  const auto file = dir / "station.db";
  StoreOptions o;
  o.max_pages = 80;   // 80 x 4096 B: a quota that fills after a few 201-point runs
  auto s = RunStore::open(file, o);
  ASSERT_TRUE(s.ok()) << s.error().message;
  std::vector<std::string> stored;
  Error failure;
  std::string failed_id;
  for (int i = 0; i < 500; ++i) {
    auto run = testdata::make_run("F" + std::to_string(i), "LF", i, 915e6);
    auto st = (*s)->save_run(run);
    if (!st.ok()) { failure = st.error(); failed_id = run.run_id; break; }
    stored.push_back(run.run_id);
  }
  ASSERT_FALSE(failed_id.empty()) << "the quota never filled";
  EXPECT_EQ(failure.kind, ErrorKind::storage);
  EXPECT_NE(failure.message.find("full"), std::string::npos) << failure.message;   // SQLITE_FULL text
  EXPECT_NE(failure.message.find(failed_id), std::string::npos) << failure.message;
  EXPECT_NE(failure.message.find("station.db"), std::string::npos) << failure.message;
  std::printf("[ info ] %zu runs fit; the next failed with: %s\n", stored.size(), failure.message.c_str());
  // The store stays usable for reading after the failure.
  EXPECT_TRUE((*s)->load_run(stored.back()).ok());
  s->reset();

  auto again = RunStore::open(file);
  ASSERT_TRUE(again.ok());
  EXPECT_FALSE((*again)->load_run(failed_id).ok());
  EXPECT_EQ(count(file, "SELECT count(*) FROM runs"), static_cast<long long>(stored.size()));
  EXPECT_EQ(count(file, ("SELECT count(*) FROM readings WHERE run_id = '" + failed_id + "'").c_str()), 0);
  EXPECT_EQ(count(file, ("SELECT count(*) FROM units WHERE serial = 'F" + std::to_string(stored.size()) + "'").c_str()), 0);
  EXPECT_EQ(*(*again)->integrity_check(), "ok");
  again->reset();
  std::filesystem::remove_all(dir);
}

// Throughput figure, printed (no timing assertion). Synchronous=FULL, 201 points per run.
TEST(StoreThroughput, PrintsCommittedRunsPerSecond) {
  const auto dir = testdata::temp_dir("rate");
  auto s = RunStore::open(dir / "station.db");
  ASSERT_TRUE(s.ok());
  std::vector<core::RunResult> runs;
  for (int i = 0; i < 300; ++i) runs.push_back(testdata::make_run("R" + std::to_string(i % 50), "LR", i, 915e6));
  const auto t0 = std::chrono::steady_clock::now();
  for (const auto& r : runs) ASSERT_TRUE((*s)->save_run(r).ok());
  const double secs = std::chrono::duration<double>(std::chrono::steady_clock::now() - t0).count();
  std::printf("[ info ] committed %zu runs of 201 points in %.3f s: %.0f runs/s (WAL, synchronous=FULL, this disk)\n",
              runs.size(), secs, runs.size() / secs);
  s->reset();
  std::filesystem::remove_all(dir);
}

}  // namespace
}  // namespace echoline::store
