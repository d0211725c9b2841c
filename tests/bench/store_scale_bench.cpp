// Benchmarks of what the pages and a scraper ask of a station's run store after many months:
// one /metrics render (this station's yield, the outbox, the exposition), one lot summary, and
// a store commit while /metrics is scraped without pause. The store holds
// ECHOLINE_BENCH_STORE_RUNS runs (default 50 000) of 221 points, in lots of 1 000.
// Prints numbers only; asserts nothing about time. Single-threaded except the scraper thread.
#include <algorithm>
#include <atomic>
#include <chrono>
#include <cstdlib>
#include <filesystem>
#include <memory>
#include <stdexcept>
#include <string>
#include <thread>
#include <vector>

#include <benchmark/benchmark.h>
#include <fmt/format.h>
#include <sqlite3.h>

#include "daemon/core/calibration.hpp"
#include "daemon/service/lot_summary.hpp"
#include "daemon/store/run_store.hpp"
#include "daemon/web/metrics.hpp"
#include "tests/bench/bench_data.hpp"

namespace {

using namespace echoline;

constexpr int kLotSize = 1000;
constexpr int kPoints = 221;
constexpr const char* kStation = "line2-bench1";   // bench::make_run's station

int lots_wanted() {
  long runs = 50000;
  if (const char* env = std::getenv("ECHOLINE_BENCH_STORE_RUNS")) runs = std::strtol(env, nullptr, 10);
  return static_cast<int>(std::max(1L, (runs + kLotSize - 1) / kLotSize));
}

void exec(sqlite3* db, const std::string& sql) {
  char* err = nullptr;
  if (sqlite3_exec(db, sql.c_str(), nullptr, nullptr, &err) != SQLITE_OK) {
    std::string what = err ? err : "unknown error";
    sqlite3_free(err);
    throw std::runtime_error(fmt::format("filling the benchmark store: {}: {}", what, sql.substr(0, 120)));
  }
}

// The store: lot LOT-0000 goes through RunStore::save_run; every further lot is a copy of it made
// in SQL (same columns, same readings, same outbox entry), with its own run ids, serials, lot name
// and start times one day later per lot: the rows save_run would have written for those runs.
const core::Recipe& recipe() {
  static const core::Recipe r = bench::whip_recipe(kPoints);
  return r;
}

std::filesystem::path filled_store() {
  static const std::filesystem::path file = [] {
    const auto path = bench::temp_folder() / "months.sqlite";
    const auto cal = core::build_calibration(recipe(), bench::standard_traces(recipe()), bench::station_capability(),
                                             "cal-bench", "2026-03-02T07:00:00.000Z");
    {
      auto store = store::RunStore::open(path);
      if (!store) throw std::runtime_error(store.error().message);
      for (int i = 0; i < kLotSize; ++i) {
        if (Status s = (*store)->save_run(bench::make_run(recipe(), cal, "LOT-0000", i)); !s)
          throw std::runtime_error(s.error().message);
      }
    }
    sqlite3* db = nullptr;
    if (sqlite3_open(path.c_str(), &db) != SQLITE_OK) throw std::runtime_error("cannot open the benchmark store");
    std::vector<std::string> columns;
    sqlite3_stmt* info = nullptr;
    sqlite3_prepare_v2(db, "SELECT name FROM pragma_table_info('runs') WHERE name <> 'seq' ORDER BY cid", -1, &info, nullptr);
    while (sqlite3_step(info) == SQLITE_ROW) columns.emplace_back(reinterpret_cast<const char*>(sqlite3_column_text(info, 0)));
    sqlite3_finalize(info);
    exec(db, "PRAGMA synchronous=OFF");
    const int lots = lots_wanted();
    for (int k = 1; k < lots; ++k) {
      const std::string shift = fmt::format("strftime('%Y-%m-%dT%H:%M:%fZ', {{}}, '+{} days')", k);
      std::string names, values;
      for (const auto& c : columns) {
        names += (names.empty() ? "" : ", ") + c;
        std::string v = c;
        if (c == "run_id" || c == "serial") v = fmt::format("{} || '-{}'", c, k);
        else if (c == "lot") v = fmt::format("'LOT-{:04d}'", k);
        else if (c == "started_utc" || c == "ended_utc") v = fmt::format(fmt::runtime(shift), c);
        values += (values.empty() ? "" : ", ") + v;
      }
      exec(db, "BEGIN");
      exec(db, fmt::format("INSERT INTO units(serial, first_seen_utc, last_seen_utc, last_verdict, run_count) "
                           "SELECT serial || '-{0}', {1}, {2}, last_verdict, run_count FROM units "
                           "WHERE serial IN (SELECT serial FROM runs WHERE lot = 'LOT-0000')",
                           k, fmt::format(fmt::runtime(shift), "first_seen_utc"), fmt::format(fmt::runtime(shift), "last_seen_utc")));
      exec(db, fmt::format("INSERT INTO runs({}) SELECT {} FROM runs WHERE lot = 'LOT-0000' ORDER BY seq", names, values));
      exec(db, fmt::format("INSERT INTO readings(run_id, idx, frequency_hz, raw_dbm, rl_db, rl_worst_db, rl_best_db) "
                           "SELECT run_id || '-{}', idx, frequency_hz, raw_dbm, rl_db, rl_worst_db, rl_best_db FROM readings "
                           "WHERE run_id IN (SELECT run_id FROM runs WHERE lot = 'LOT-0000')",
                           k));
      exec(db, fmt::format("INSERT INTO outbox(run_id, committed_utc) SELECT run_id, ended_utc FROM runs "
                           "WHERE lot = 'LOT-{:04d}' ORDER BY seq",
                           k));
      exec(db, "COMMIT");
    }
    sqlite3_close(db);
    return path;
  }();
  return file;
}

store::RunStore& scale_store() {
  static std::unique_ptr<store::RunStore> store = [] {
    auto s = store::RunStore::open(filled_store());
    if (!s) throw std::runtime_error(s.error().message);
    return std::move(s.value());
  }();
  return *store;
}

// What the page server's /metrics handler asks of the store, then the exposition. `counting`:
// the yield counted from every run of the station on each scrape (yield_by), as /metrics did
// before the store kept it (RunStore::live_yield); for comparison.
std::string scrape(store::RunStore& store, bool counting = false) {
  web::MetricsInput in;
  in.station = kStation;
  if (counting) {
    auto yields = store.yield_by(store::YieldGroup::station, kStation);
    if (!yields) throw std::runtime_error(yields.error().message);
    if (!yields->empty()) in.yield = yields->front();
  } else {
    auto yield = web::station_yield(store, kStation);
    if (!yield) throw std::runtime_error(yield.error().message);
    in.yield = std::move(yield.value());
  }
  auto outbox = store.outbox_status();
  if (!outbox) throw std::runtime_error(outbox.error().message);
  in.status = {{"forwarding", {{"outbox_depth", outbox->depth}, {"outbox_refused", outbox->refused}}}};
  return web::render_openmetrics(in);
}

// A daemon's first count of this station's yield after it opens the store.
void BM_ScaleStationYieldAtStart(benchmark::State& state) {
  filled_store();
  int runs = 0;
  for (auto _ : state) {
    auto store = store::RunStore::open(filled_store());
    if (!store) {
      state.SkipWithError(store.error().message.c_str());
      break;
    }
    auto yield = web::station_yield(**store, kStation);
    if (!yield) {
      state.SkipWithError(yield.error().message.c_str());
      break;
    }
    runs = yield->runs;
  }
  state.counters["runs"] = runs;
}
BENCHMARK(BM_ScaleStationYieldAtStart)->Unit(benchmark::kMillisecond)->Iterations(3);

// Arg 0: as echolined scrapes (the yield counted once when the daemon started, before the loop);
// arg 1: counting every run of the station on each scrape.
void BM_ScaleMetricsRender(benchmark::State& state) {
  store::RunStore& store = scale_store();
  const bool counting = state.range(0) == 1;
  std::size_t bytes = scrape(store, counting).size();
  for (auto _ : state) {
    std::string text = scrape(store, counting);
    bytes = text.size();
    benchmark::DoNotOptimize(text);
  }
  state.counters["runs"] = lots_wanted() * kLotSize;
  state.counters["bytes"] = static_cast<double>(bytes);
}
BENCHMARK(BM_ScaleMetricsRender)->Arg(0)->Arg(1)->Unit(benchmark::kMillisecond)->Iterations(20);

// The outbox counts the status call adds to a scrape (every run waits there on a station without
// a central database).
void BM_ScaleOutboxStatus(benchmark::State& state) {
  store::RunStore& store = scale_store();
  long long depth = 0;
  for (auto _ : state) {
    auto outbox = store.outbox_status();
    if (!outbox) {
      state.SkipWithError(outbox.error().message.c_str());
      break;
    }
    depth = outbox->depth;
  }
  state.counters["depth"] = static_cast<double>(depth);
}
BENCHMARK(BM_ScaleOutboxStatus)->Unit(benchmark::kMillisecond)->Iterations(20);

void BM_ScaleLotSummary(benchmark::State& state) {
  store::RunStore& store = scale_store();
  int lot_runs = 0;
  for (auto _ : state) {
    auto summary = service::lot_summary(store, "", recipe().limits);
    if (!summary) {
      state.SkipWithError(summary.error().message.c_str());
      break;
    }
    lot_runs = (*summary)["yield"].value("runs", 0);
    benchmark::DoNotOptimize(summary);
  }
  state.counters["runs"] = lots_wanted() * kLotSize;
  state.counters["lot_runs"] = lot_runs;
}
BENCHMARK(BM_ScaleLotSummary)->Unit(benchmark::kMillisecond)->Iterations(20);

// One synchronous 221-point commit, 20 ms after the last, while another thread renders /metrics
// without pause: what scrapers cost the sweep engine's commits at worst. Arg as for
// BM_ScaleMetricsRender. Runs last: it adds runs to the store.
void BM_ScaleCommitWhileScraped(benchmark::State& state) {
  store::RunStore& store = scale_store();
  const bool counting = state.range(0) == 1;
  const auto cal = core::build_calibration(recipe(), bench::standard_traces(recipe()), bench::station_capability(),
                                           "cal-bench", "2026-03-02T07:00:00.000Z");
  core::RunResult run = bench::make_run(recipe(), cal, "LOT-LIVE", 1);
  std::atomic<bool> stop{false};
  std::atomic<long> scrapes{0};
  std::thread scraper([&] {
    while (!stop) {
      benchmark::DoNotOptimize(scrape(store, counting));
      ++scrapes;
    }
  });
  static long n = 0;
  for (auto _ : state) {
    std::this_thread::sleep_for(std::chrono::milliseconds(20));   // the sweep of the next unit
    run.run_id = fmt::format("bench-live-{:08d}", ++n);
    const auto t0 = std::chrono::steady_clock::now();
    if (Status s = store.save_run(run); !s) {
      state.SkipWithError(s.error().message.c_str());
      break;
    }
    state.SetIterationTime(std::chrono::duration<double>(std::chrono::steady_clock::now() - t0).count());
  }
  stop = true;
  scraper.join();
  state.counters["scrapes"] = static_cast<double>(scrapes);
}
BENCHMARK(BM_ScaleCommitWhileScraped)->Arg(0)->Arg(1)->Unit(benchmark::kMillisecond)->Iterations(30)->UseManualTime();

}  // namespace
