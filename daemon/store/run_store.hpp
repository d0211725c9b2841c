// The station's run store: one SQLite file (WAL, synchronous=FULL) holding units, runs with every
// raw reading, and calibrations with their raw standard traces. Only this module touches disk.
// Thread-safe: one connection per RunStore, calls are serialised by an internal mutex.
// A run, its readings and its unit-row update commit in ONE transaction; nothing is overwritten
// except a run's own write-ahead record (begin_run), which its finished run replaces.
#pragma once

#include <filesystem>
#include <map>
#include <memory>
#include <optional>
#include <string>
#include <string_view>
#include <vector>

#include "daemon/core/run_result.hpp"
#include "daemon/store/run_reader.hpp"
#include "daemon/store/serial.hpp"
#include "drivers/result.hpp"

namespace echoline::store {

// Schema version this code writes (PRAGMA user_version). Older files are migrated on open;
// newer files are refused (ErrorKind::storage, message names both versions).
inline constexpr int kSchemaVersion = 12;

// The reason a run carries while it is in progress, and the reason it gets when a starting daemon
// finds it still in progress (the daemon that ran it was killed or crashed).
inline constexpr std::string_view kInProgressReason = "in progress";
inline constexpr std::string_view kStoppedUnexpectedlyReason = "daemon stopped unexpectedly";

struct StoreOptions {
  int busy_timeout_ms = 5000;                           // wait this long for another writer
  std::string serial_pattern{kDefaultSerialPattern};    // save_run validates serials with this
  long long max_pages = 0;   // size cap in database pages (PRAGMA max_page_count, 4096 B); 0 = none.
                             // A save that would grow the file past it fails with ErrorKind::storage.
};

// One row of the units table.
struct UnitSummary {
  std::string serial;
  std::string first_seen_utc;
  std::string last_seen_utc;
  std::string last_verdict;   // "pass" | "fail" | "inconclusive" | "aborted"
  int run_count = 0;
};

// The forwarding outbox (outbox.cpp): committed runs not yet in the central database.
struct OutboxEntry {
  long long seq = 0;            // commit order
  std::string run_id;
  std::string committed_utc;
};
struct OutboxStatus {
  long long depth = 0;              // runs waiting (refused ones excluded)
  long long refused = 0;            // runs the central database refused (content differs): kept, not retried
  std::string oldest_run_id;        // the oldest waiting run, "" when none
  std::string oldest_committed_utc;
  std::string last_forward_utc;     // the last successful forward, "" when never
  std::string last_run_id;          // the last run forwarded
  long long forwarded_runs = 0;     // runs forwarded since the store was made
  bool queueing = true;             // false: no central database configured, finished runs are not queued
  std::string unqueued_since_utc;   // when queueing stopped ("" while queueing)
};
// What RunStore::set_central_configured changed.
struct ForwardingChange {
  long long queued = 0;             // runs queued because they were committed while queueing was off
  long long unqueued = 0;           // waiting runs taken out of the outbox (queued again later)
  std::string unqueued_since_utc;   // when queueing stopped ("" when it is on or was never off)
};

enum class YieldGroup { lot, recipe, station };

// Yield of one group (a lot, a recipe name, a station). Definitions (see README):
//   runs_by_verdict / runs_by_class count RUNS (retests included, aborted included).
//   units_tested = distinct serials with at least one finished (non-aborted) run.
//   first_pass_yield = units whose FIRST finished run passed / units_tested.
//   final_yield      = units whose LATEST finished run passed / units_tested.
//   Both are 0 when units_tested == 0. Order of runs: started_utc, then insertion.
struct YieldSummary {
  std::string group;                       // the lot / recipe name / station
  int runs = 0;
  std::map<std::string, int> runs_by_verdict;   // "pass" -> n ...; every verdict present
  std::map<std::string, int> runs_by_class;     // failure classes of fail/inconclusive runs ("" excluded)
  int units_tested = 0;
  int units_first_pass = 0;
  int units_final_pass = 0;
  double first_pass_yield = 0;
  double final_yield = 0;
};

class RunStore : public RunReader {
 public:
  // Opens or creates `file`. Sets journal_mode=WAL, synchronous=FULL, foreign_keys=ON, the busy
  // timeout; migrates an older schema in one transaction; refuses a newer one.
  // Errors: ErrorKind::storage naming the file.
  static Result<std::unique_ptr<RunStore>> open(const std::filesystem::path& file, StoreOptions options = {});
  // Opens an existing store for reading only (offline readers: the client's --store, the
  // console's plot): SQLITE_OPEN_READONLY, no pragma that writes, never migrates. A missing file,
  // or a schema other than kSchemaVersion, is refused (ErrorKind::storage naming file and
  // versions). Every write call on it fails with a storage error.
  static Result<std::unique_ptr<RunStore>> open_read_only(const std::filesystem::path& file, StoreOptions options = {});

  ~RunStore() override;
  RunStore(const RunStore&) = delete;
  RunStore& operator=(const RunStore&) = delete;

  // Stores a run with all its points and updates the unit row, in one transaction.
  // REQUIRES: run.run_id non-empty and not yet stored (a retest is a new run_id).
  // Refuses (stores nothing) an invalid serial (invalid_argument), a duplicate run_id
  // (invalid_argument); any SQLite failure is ErrorKind::storage and the transaction is rolled back.
  // When it returns ok, the run is on disk (synchronous=FULL).
  // When begin_run stored this run_id as in progress, the finished run replaces that record in
  // the same transaction (its readings too; the unit's run count is not raised twice).
  Status save_run(const core::RunResult& run);

  // Write-ahead record of a run about to measure: stores the run (identity, recipe, calibration,
  // operator, station, software, started time; any points it already has) with verdict aborted,
  // reason kInProgressReason and in_progress = 1, and counts it on the unit, in its own committed
  // transaction. Same refusals as save_run. The caller must not switch RF on unless this is ok.
  Status begin_run(const core::RunResult& run);
  // Finalizes every run still in progress (their daemon never finished them): verdict aborted,
  // `reason`, ended_utc = `ended_utc`, points_count = the readings stored. One transaction.
  // Returns the run ids finalized, oldest first.
  Result<std::vector<std::string>> finalize_interrupted(std::string_view reason, std::string_view ended_utc);
  // Run ids currently marked in progress, oldest first.
  Result<std::vector<std::string>> runs_in_progress();

  // Stores a calibration with its raw traces (one transaction). Duplicate id: invalid_argument.
  // Keeps a recipe's file text under its content hash (once; later calls change nothing), so a
  // stored run can be re-judged offline with the very limits that judged it.
  Status save_recipe_text(std::string_view content_hash, std::string_view name, std::string_view version,
                          std::string_view text);
  // The text stored for a content hash, or nullopt.
  Result<std::optional<std::string>> recipe_text(std::string_view content_hash) override;
  Status save_calibration(const core::CalibrationRecord& cal);
  // Updates the counters the service maintains: units judged since the calibration and since its
  // last check-standard measurement (both survive a restart).
  Status set_calibration_units(std::string_view calibration_id, int units_since, int units_since_check);
  // Marks a stored calibration as no longer usable (e.g. the check standard drifted), with the
  // reason and the time (UTC, station form). Persisted: every later load returns valid=false
  // with "invalidated at <utc>: <reason>" appended to errors. Invalidating again keeps the first
  // reason. Unknown id or empty reason: ErrorKind::invalid_argument; SQLite failure: storage.
  Status invalidate_calibration(std::string_view id, std::string_view reason);

  // Loads one run with its points. Unknown id: ErrorKind::invalid_argument.
  Result<core::RunResult> load_run(std::string_view run_id) override;
  // A serial's runs, oldest first (started_utc, then insertion order). Points omitted unless asked.
  Result<std::vector<core::RunResult>> history(std::string_view serial, bool with_points = false) override;
  // A lot's runs in the same order.
  Result<std::vector<core::RunResult>> lot_runs(std::string_view lot, bool with_points) override;
  // Runs with from_utc <= started_utc < to_utc (ISO 8601 strings compare as times when they
  // share the "YYYY-MM-DDTHH:MM:SS[.fff]Z" form the station writes).
  Result<std::vector<core::RunResult>> runs_between(std::string_view from_utc, std::string_view to_utc,
                                                    bool with_points = false);
  Result<int> run_count(std::string_view serial);
  // The lot of the most recently started run that has one; nullopt when none has.
  Result<std::optional<std::string>> latest_lot();
  Result<std::optional<UnitSummary>> unit(std::string_view serial);

  // The most recently created calibration (created_utc, then insertion), with traces.
  Result<std::optional<core::CalibrationRecord>> latest_calibration();
  Result<std::optional<core::CalibrationRecord>> load_calibration(std::string_view id) override;

  // Yield per group; `only` restricts to one group value when non-empty. Reads every run of the
  // groups asked for.
  Result<std::vector<YieldSummary>> yield_by(YieldGroup group, std::string_view only = {});
  // One group's yield kept in memory (echolined: its own station's, for /metrics). The first call
  // for a group counts it from the store, once; later calls cost O(1), because every write through
  // this RunStore (save_run, begin_run, finalize_interrupted) adjusts it by the runs of the serials
  // it touched, inside its transaction. Same value as yield_by(group, value) (an empty summary when
  // the group has no run), provided no other connection writes runs to the file (in echolined none
  // does: the forwarder's connection writes only the outbox). One group at a time: asking for
  // another counts that one instead.
  Result<YieldSummary> live_yield(YieldGroup group, std::string_view value);

  // --- forwarding (outbox.cpp) ---
  // The station's instance id: 16 hex digits drawn when the store was made (schema 8). Part of
  // every run id, so run ids stay unique when two stations share a name or one is re-installed.
  Result<std::string> instance_id();
  // The number at the end of the newest run ids (…-000041 → 41; 0 for an empty store): run ids
  // count on from it across restarts, without gaps.
  Result<long long> last_run_number();
  // Whether the station forwards to a central database; echolined says so once at start, before
  // any run is written. The mode is kept in the store (every connection follows it):
  //   true:  every finished run (save_run, finalize_interrupted) is queued in the same transaction
  //          that stores it; the first call after the store was off queues, once and in store
  //          order, every finished run that may have been committed unqueued (README, "Outbox").
  //   false: nothing is queued; waiting runs leave the outbox, refused ones stay. The store
  //          remembers from which run on it stopped queueing, so nothing is lost.
  // A new store queues (as before this call existed). Repeating a call changes nothing.
  // `utc`: the time recorded as when queueing stopped. Errors: storage.
  Result<ForwardingChange> set_central_configured(bool configured, std::string_view utc);
  // Up to `limit` waiting runs, oldest commit first (refused ones skipped).
  Result<std::vector<OutboxEntry>> outbox_peek(int limit);
  // Removes forwarded runs from the outbox and records the forward time, in one transaction.
  Status outbox_done(const std::vector<std::string>& run_ids, std::string_view utc);
  // Keeps a run in the outbox but stops retrying it (the central database holds different
  // content under its id); `why` is shown by status.
  Status outbox_refuse(std::string_view run_id, std::string_view why);
  Result<OutboxStatus> outbox_status();

  // Milliseconds this connection waited for another connection's write lock since the last call
  // (then reset). In echolined the other writer is the forwarder: this is what it cost a test.
  double take_lock_wait_ms();

  // "ok" or SQLite's list of problems (PRAGMA integrity_check).
  Result<std::string> integrity_check();
  const std::filesystem::path& path() const;

 private:
  struct Impl;
  explicit RunStore(std::unique_ptr<Impl> impl);
  std::unique_ptr<Impl> impl_;
};

}  // namespace echoline::store
