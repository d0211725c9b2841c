// RunStore's private state (one SQLite connection, its options and the mutex that serialises
// callers), shared by the .cpp files that implement RunStore (run_store.cpp, outbox.cpp).
// Internal to daemon/store. Callers hold `mutex` around every use of `db`.
#pragma once

#include <chrono>
#include <filesystem>
#include <mutex>
#include <optional>
#include <string>
#include <string_view>
#include <vector>

#include <fmt/format.h>

#include "daemon/store/run_store.hpp"
#include "daemon/store/sqlite_db.hpp"
#include "daemon/store/yield.hpp"

namespace echoline::store {

struct RunStore::Impl {
  detail::Database db;
  StoreOptions options;
  std::filesystem::path file;
  std::mutex mutex;
  // Time this connection spent waiting for another connection's write lock (the busy handler,
  // run_store.cpp), in ms: in echolined the only other writer is the forwarder's connection.
  double lock_wait_ms = 0;
  std::chrono::steady_clock::time_point lock_wait_started;
  // The group RunStore::live_yield keeps, and its yield as of the last commit.
  struct LiveYield {
    YieldGroup group;
    std::string value;
    YieldSummary yield;
  };
  std::optional<LiveYield> live;

  // SQLite's busy handler: waits in 1 ms steps up to the busy timeout and adds the time it waited
  // to lock_wait_ms (what another connection's write lock cost this one).
  static int wait_for_lock(void* impl_ptr, int attempt) {
    auto* impl = static_cast<Impl*>(impl_ptr);
    const auto now = std::chrono::steady_clock::now();
    if (attempt == 0) impl->lock_wait_started = now;
    const double waited = std::chrono::duration<double, std::milli>(now - impl->lock_wait_started).count();
    if (waited >= impl->options.busy_timeout_ms) return 0;
    sqlite3_sleep(1);
    impl->lock_wait_ms += std::chrono::duration<double, std::milli>(std::chrono::steady_clock::now() - now).count();
    return 1;
  }

  Error fail(const Error& e, std::string_view doing) const {
    return e.with_context(fmt::format("run store {}: {}", file.string(), doing));
  }

  // Runs `body` inside BEGIN IMMEDIATE .. COMMIT; rolls back on any error.
  template <typename F>
  Status transaction(std::string_view doing, F&& body) {
    if (auto s = db.exec("BEGIN IMMEDIATE"); !s.ok()) return fail(s.error(), doing);
    Status s = body();
    if (s.ok()) {
      s = db.exec("COMMIT");
      if (!s.ok()) s = fail(s.error(), doing);
    }
    if (!s.ok() && !sqlite3_get_autocommit(db.handle())) (void)db.exec("ROLLBACK");
    return s;
  }

  // Queues a committed run for forwarding (outbox.cpp); inside the caller's transaction.
  Status enqueue(std::string_view run_id);
  // The live group's yield over one serial's runs (nullopt when no group is live). Called inside
  // a write's transaction before and after it changes that serial's runs: the difference is what
  // the write adds to `live`.
  Result<std::optional<YieldSummary>> live_part(std::string_view serial);
  // Adds (after - before) of every touched serial to `live`, once the write has committed.
  void apply_live(const std::vector<std::optional<YieldSummary>>& before,
                  const std::vector<std::optional<YieldSummary>>& after);
  Status store_run(const core::RunResult& run, bool in_progress);
  // RunStore::yield_by without the lock.
  Result<std::vector<YieldSummary>> count_yield(YieldGroup group, std::string_view only);
  Result<std::vector<std::string>> in_progress_ids();
  Result<std::vector<core::RunResult>> select_runs(std::string_view where, const std::vector<std::string>& params,
                                                   bool with_points, std::string_view doing);
  Status load_points(core::RunResult& run);
  Result<std::optional<core::CalibrationRecord>> select_calibration(std::string_view where, std::string_view param);
};

}  // namespace echoline::store
