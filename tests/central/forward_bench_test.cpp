// Benchmark (disabled in ctest; timing goals are printed, never asserted): how many 201-point
// runs per second the forwarder ships from a station store to a local PostgreSQL server, and how
// long a test's store commit takes with and without the forwarder working beside it.
// Run: test_central --gtest_also_run_disabled_tests --gtest_filter='ForwardBench.*'
#include <algorithm>
#include <chrono>
#include <cstdio>
#include <thread>

#include <gtest/gtest.h>
#include <pqxx/pqxx>

#include "daemon/central/forwarder.hpp"
#include "daemon/central/schema.hpp"
#include "daemon/core/cal_kit.hpp"
#include "daemon/store/run_store.hpp"
#include "tests/support/postgres_server.hpp"
#include "tests/support/process.hpp"

namespace echoline::central {
namespace {

using Clock = std::chrono::steady_clock;

core::RunResult bench_run(int n) {
  core::RunResult r;
  r.run_id = "bench-run-" + std::to_string(n);
  r.serial = "BENCH-" + std::to_string(n);
  r.lot = "BENCH-LOT";
  r.station = "bench-a";
  r.operator_name = "op";
  r.recipe = {"whip915", "1", "hash"};
  r.decision_rule = "guarded";
  r.started_utc = "2026-12-01T10:00:00.000Z";
  r.ended_utc = "2026-12-01T10:00:01.000Z";
  r.verdict = core::Verdict::pass;
  r.metrics.resonance_hz = 915e6 + n;
  for (int i = 0; i < 201; ++i) {
    r.points.push_back({860e6 + i * 0.55e6, -30.0 - i * 0.01, 12.0 + i * 0.01, 11.0, 13.5 + n * 1e-6});
  }
  return r;
}

struct Spread {
  double p50 = 0, p99 = 0, max = 0;
};
Spread spread(std::vector<double> ms) {
  std::sort(ms.begin(), ms.end());
  return {ms[ms.size() / 2], ms[ms.size() * 99 / 100], ms.back()};
}

std::vector<double> timed_saves(store::RunStore& st, int from, int count) {
  std::vector<double> ms;
  for (int i = from; i < from + count; ++i) {
    const auto run = bench_run(i);
    const auto t0 = Clock::now();
    EXPECT_TRUE(st.save_run(run).ok());
    ms.push_back(std::chrono::duration<double, std::milli>(Clock::now() - t0).count());
  }
  return ms;
}

TEST(ForwardBench, DISABLED_PrintsForwardedRunsPerSecondAndCommitTimes) {
  if (auto why = testing::PostgresServer::unavailable()) GTEST_SKIP() << *why;
  testing::PostgresServer pg;
  {
    pqxx::connection admin(pg.admin_conninfo());
    migrate(admin);
  }
  pg.psql("CREATE ROLE bench LOGIN PASSWORD 'Bench-Pw' IN ROLE echoline_station");
  testing::TempDir dir;
  const auto file = dir / "bench.sqlite";
  auto opened = store::RunStore::open(file);
  ASSERT_TRUE(opened.ok());
  store::RunStore& st = **opened;
  const int backlog = 2000;
  const Spread alone = spread(timed_saves(st, 0, backlog));
  auto settings = settings_from_connection_string(pg.tcp_conninfo("bench", "Bench-Pw"));
  ASSERT_TRUE(settings.ok());
  const auto t0 = Clock::now();
  Forwarder fwd(file, {}, *settings, kit_document(core::builtin_conservative_kit()));
  // While the forwarder drains the backlog, the station keeps committing runs.
  const Spread beside = spread(timed_saves(st, backlog, 200));
  for (;;) {
    auto s = st.outbox_status();
    ASSERT_TRUE(s.ok());
    if (s->depth == 0) break;
    std::this_thread::sleep_for(std::chrono::milliseconds(20));
  }
  const double secs = std::chrono::duration<double>(Clock::now() - t0).count();
  fwd.stop();
  EXPECT_EQ(pg.psql("SELECT count(*) FROM echoline.runs"), std::to_string(backlog + 200) + "\n");
  std::printf("forwarded %d runs of 201 points in %.2f s: %.0f runs/s (batches of %d)\n", backlog + 200, secs,
              (backlog + 200) / secs, settings->batch_runs);
  std::printf("store commit per run, no forwarder:      p50 %.1f ms, p99 %.1f ms, max %.1f ms (%d runs)\n", alone.p50,
              alone.p99, alone.max, backlog);
  std::printf("store commit per run, forwarder working: p50 %.1f ms, p99 %.1f ms, max %.1f ms (200 runs)\n", beside.p50,
              beside.p99, beside.max);
}

}  // namespace
}  // namespace echoline::central
