// RunStore's private state (one SQLite connection, its options and the mutex that serialises
// callers), shared by the .cpp files that implement RunStore (run_store.cpp, outbox.cpp).
// Internal to daemon/store. Callers hold `mutex` around every use of `db`.
#pragma once

#include <filesystem>
#include <mutex>
#include <optional>
#include <string>
#include <string_view>
#include <vector>

#include <fmt/format.h>

#include "daemon/store/run_store.hpp"
#include "daemon/store/sqlite_db.hpp"

namespace echoline::store {

struct RunStore::Impl {
  detail::Database db;
  StoreOptions options;
  std::filesystem::path file;
  std::mutex mutex;

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
  Status store_run(const core::RunResult& run, bool in_progress);
  Result<std::vector<std::string>> in_progress_ids();
  Result<std::vector<core::RunResult>> select_runs(std::string_view where, const std::vector<std::string>& params,
                                                   bool with_points, std::string_view doing);
  Status load_points(core::RunResult& run);
  Result<std::optional<core::CalibrationRecord>> select_calibration(std::string_view where, std::string_view param);
};

}  // namespace echoline::store
