// Schema history. Never edit a released step: add a new one at the end and raise kSchemaVersion.
#include "daemon/store/schema.hpp"

#include <fmt/format.h>

#include "daemon/store/run_store.hpp"

namespace echoline::store::detail {

namespace {

constexpr std::string_view kVersion1 = R"sql(
CREATE TABLE units (
  serial TEXT PRIMARY KEY,
  first_seen_utc TEXT NOT NULL,
  last_seen_utc TEXT NOT NULL,
  last_verdict TEXT NOT NULL,
  run_count INTEGER NOT NULL
);
CREATE TABLE runs (
  seq INTEGER PRIMARY KEY AUTOINCREMENT,
  run_id TEXT NOT NULL UNIQUE,
  serial TEXT NOT NULL REFERENCES units(serial),
  lot TEXT NOT NULL,
  recipe_name TEXT NOT NULL,
  recipe_version TEXT NOT NULL,
  recipe_hash TEXT NOT NULL,
  decision_rule TEXT NOT NULL,
  station TEXT NOT NULL,
  operator TEXT NOT NULL,
  instruments_json TEXT NOT NULL,
  started_utc TEXT NOT NULL,
  ended_utc TEXT NOT NULL,
  temperature_c REAL,
  calibration_id TEXT NOT NULL,
  retest INTEGER NOT NULL,
  verdict TEXT NOT NULL CHECK (verdict IN ('pass','fail','inconclusive','aborted')),
  failure_class TEXT NOT NULL,
  reason TEXT NOT NULL,
  resonance_hz REAL,
  depth_db REAL,
  bandwidth_hz REAL,
  band_low_hz REAL,
  band_high_hz REAL,
  min_margin_db REAL,
  vswr_at_resonance REAL,
  mismatch_loss_db REAL,
  directivity_db REAL,
  trim_element_length_mm REAL,
  trim_change_mm REAL,
  trim_measured_hz REAL,
  trim_target_hz REAL,
  trim_text TEXT,
  total_s REAL,
  sweep_s REAL,
  analysis_s REAL,
  points_count INTEGER NOT NULL
);
CREATE TABLE readings (
  run_id TEXT NOT NULL REFERENCES runs(run_id),
  idx INTEGER NOT NULL,
  frequency_hz REAL NOT NULL,
  raw_dbm REAL,
  rl_db REAL,
  rl_worst_db REAL,
  rl_best_db REAL,
  PRIMARY KEY (run_id, idx)
) WITHOUT ROWID;
CREATE TABLE calibrations (
  seq INTEGER PRIMARY KEY AUTOINCREMENT,
  id TEXT NOT NULL UNIQUE,
  created_utc TEXT NOT NULL,
  recipe_name TEXT NOT NULL,
  recipe_version TEXT NOT NULL,
  recipe_hash TEXT NOT NULL,
  station TEXT NOT NULL,
  instruments_json TEXT NOT NULL,
  temperature_c REAL,
  reference_json TEXT NOT NULL,
  directivity_json TEXT NOT NULL,
  min_directivity_db REAL,
  warnings_json TEXT NOT NULL,
  valid INTEGER NOT NULL,
  max_age_s REAL NOT NULL,
  max_units INTEGER NOT NULL,
  max_temperature_change_c REAL NOT NULL
);
CREATE TABLE calibration_traces (
  calibration_id TEXT NOT NULL REFERENCES calibrations(id),
  standard TEXT NOT NULL,
  idx INTEGER NOT NULL,
  frequency_hz REAL NOT NULL,
  raw_dbm REAL,
  PRIMARY KEY (calibration_id, standard, idx)
) WITHOUT ROWID;
)sql";

constexpr std::string_view kVersion2 = R"sql(
ALTER TABLE calibrations ADD COLUMN noise_margin_db REAL NOT NULL DEFAULT 0;
ALTER TABLE calibrations ADD COLUMN units_since INTEGER NOT NULL DEFAULT 0;
CREATE INDEX runs_by_serial ON runs(serial, started_utc, seq);
CREATE INDEX runs_by_lot ON runs(lot, started_utc, seq);
CREATE INDEX runs_by_start ON runs(started_utc, seq);
)sql";

constexpr std::string_view kVersion3 = R"sql(
ALTER TABLE calibrations ADD COLUMN errors_json TEXT NOT NULL DEFAULT '[]';
)sql";

constexpr std::string_view kVersion4 = R"sql(
ALTER TABLE runs ADD COLUMN resonance_low_hz REAL;
ALTER TABLE runs ADD COLUMN resonance_high_hz REAL;
)sql";

constexpr std::string_view kVersion5 = R"sql(
ALTER TABLE calibrations ADD COLUMN invalidated_reason TEXT;
ALTER TABLE calibrations ADD COLUMN invalidated_utc TEXT;
)sql";

constexpr std::string_view kVersion6 = R"sql(
ALTER TABLE calibrations ADD COLUMN kit_identity TEXT NOT NULL DEFAULT '';
ALTER TABLE calibrations ADD COLUMN kit_serial TEXT NOT NULL DEFAULT '';
ALTER TABLE calibrations ADD COLUMN budget_json TEXT NOT NULL DEFAULT '{}';
ALTER TABLE calibrations ADD COLUMN software TEXT NOT NULL DEFAULT '';
ALTER TABLE runs ADD COLUMN software TEXT NOT NULL DEFAULT '';
ALTER TABLE runs ADD COLUMN resonance_interval TEXT NOT NULL DEFAULT '';
CREATE TABLE recipes (
  content_hash TEXT PRIMARY KEY,
  name TEXT NOT NULL,
  version TEXT NOT NULL,
  text TEXT NOT NULL
) WITHOUT ROWID;
)sql";

// Write-ahead runs: a run is stored with in_progress = 1 (verdict 'aborted', reason "in progress")
// before the source's RF goes on; the finished run replaces it. A daemon that starts and finds
// rows still in progress finalizes them as aborted.
constexpr std::string_view kVersion7 = R"sql(
ALTER TABLE runs ADD COLUMN in_progress INTEGER NOT NULL DEFAULT 0 CHECK (in_progress IN (0, 1));
CREATE INDEX runs_in_progress ON runs(in_progress) WHERE in_progress = 1;
)sql";

// Forwarding to the central database: the station's random instance id (part of every run id, so
// ids stay unique across stations and across a re-installed station with the same name), the
// outbox of committed runs not yet forwarded (commit order = seq), and the forwarder's last success.
// Runs stored before this version are queued too, oldest first: the whole history is forwarded.
constexpr std::string_view kVersion8 = R"sql(
CREATE TABLE station_identity (
  id INTEGER PRIMARY KEY CHECK (id = 1),
  instance_id TEXT NOT NULL,
  created_utc TEXT NOT NULL
);
INSERT INTO station_identity(id, instance_id, created_utc)
  VALUES (1, lower(hex(randomblob(8))), strftime('%Y-%m-%dT%H:%M:%fZ', 'now'));
CREATE TABLE outbox (
  seq INTEGER PRIMARY KEY AUTOINCREMENT,
  run_id TEXT NOT NULL UNIQUE,
  committed_utc TEXT NOT NULL,
  refused TEXT
);
INSERT INTO outbox(run_id, committed_utc) SELECT run_id, ended_utc FROM runs WHERE in_progress = 0 ORDER BY seq;
CREATE TABLE forwarding (
  id INTEGER PRIMARY KEY CHECK (id = 1),
  last_forward_utc TEXT,
  last_run_id TEXT,
  forwarded_runs INTEGER NOT NULL DEFAULT 0
);
INSERT INTO forwarding(id) VALUES (1);
)sql";

// Outbox counts kept by triggers, so a status or /metrics call reads two numbers instead of
// counting an outbox that, on a station without a central database, holds every run ever stored.
// Triggers run on every connection (the forwarder's too), so the counts follow every change.
constexpr std::string_view kVersion9 = R"sql(
CREATE TABLE outbox_counts (
  id INTEGER PRIMARY KEY CHECK (id = 1),
  waiting INTEGER NOT NULL,
  refused INTEGER NOT NULL
);
INSERT INTO outbox_counts(id, waiting, refused) VALUES (1,
  (SELECT count(*) FROM outbox WHERE refused IS NULL), (SELECT count(*) FROM outbox WHERE refused IS NOT NULL));
CREATE TRIGGER outbox_counts_insert AFTER INSERT ON outbox BEGIN
  UPDATE outbox_counts SET waiting = waiting + (NEW.refused IS NULL), refused = refused + (NEW.refused IS NOT NULL)
    WHERE id = 1;
END;
CREATE TRIGGER outbox_counts_delete AFTER DELETE ON outbox BEGIN
  UPDATE outbox_counts SET waiting = waiting - (OLD.refused IS NULL), refused = refused - (OLD.refused IS NOT NULL)
    WHERE id = 1;
END;
CREATE TRIGGER outbox_counts_update AFTER UPDATE OF refused ON outbox BEGIN
  UPDATE outbox_counts SET waiting = waiting - (OLD.refused IS NULL) + (NEW.refused IS NULL),
    refused = refused - (OLD.refused IS NOT NULL) + (NEW.refused IS NOT NULL) WHERE id = 1;
END;
)sql";

// Queueing follows the station's config (RunStore::set_central_configured): on a station without
// a central database nothing is queued. unqueued_from_seq (NULL: every finished run is queued) is
// the lowest runs.seq that may have been committed without being queued, and unqueued_since_utc
// when queueing stopped, so a central database configured later gets those runs queued once.
constexpr std::string_view kVersion10 = R"sql(
ALTER TABLE forwarding ADD COLUMN unqueued_from_seq INTEGER;
ALTER TABLE forwarding ADD COLUMN unqueued_since_utc TEXT;
)sql";

constexpr std::string_view kVersion11 = R"sql(
ALTER TABLE calibrations ADD COLUMN units_since_check INTEGER NOT NULL DEFAULT 0;
)sql";

constexpr std::string_view kVersion12 = R"sql(
ALTER TABLE readings ADD COLUMN offset_raw_dbm REAL;
)sql";

}  // namespace

const std::vector<Migration>& migrations() {
  static const std::vector<Migration> steps = {
      {1, "units, runs, readings, calibrations, calibration traces", kVersion1},
      {2, "calibration noise margin and unit counter; indexes by serial, lot and start time", kVersion2},
      {3, "calibration errors (why a record is not valid)", kVersion3},
      {4, "bound interval of the true resonance per run", kVersion4},
      {5, "calibration invalidated after it was made (check-standard drift), with reason and time", kVersion5},
      {6, "calibration kit and uncertainty budget per calibration; software per run and calibration; which "
          "resonance interval decided; recipe texts by content hash (offline re-judging)", kVersion6},
      {7, "write-ahead runs: a run in progress is on record before RF goes on", kVersion7},
      {8, "station instance id, outbox of runs not yet forwarded to the central database, last forward",
       kVersion8},
      {9, "outbox counts kept by triggers (status and /metrics read them instead of counting)", kVersion9},
      {10, "runs not queued while no central database is configured, and since when", kVersion10},
      {11, "units judged since the last check-standard measurement, per calibration (kept across restarts)",
       kVersion11},
      {12, "each point's second raw reading through the offset line (recipes with the offset pair)", kVersion12},
  };
  return steps;
}

Status prepare_schema(Database& db, int busy_timeout_ms) {
  sqlite3_busy_timeout(db.handle(), busy_timeout_ms);
  auto mode = db.query_text("PRAGMA journal_mode=WAL");
  if (!mode.ok()) return mode.error();
  if (*mode != "wal") {
    return make_error(ErrorKind::storage, fmt::format("run store {}: cannot switch to WAL journal mode (got '{}')",
                                                      db.file().string(), *mode));
  }
  // synchronous is per connection: FULL makes every returned COMMIT durable in WAL mode.
  if (auto s = db.exec("PRAGMA synchronous=FULL; PRAGMA foreign_keys=ON;"); !s.ok()) return s;
  auto version = db.query_int("PRAGMA user_version");
  if (!version.ok()) return version.error();
  if (*version > kSchemaVersion) {
    return make_error(ErrorKind::storage,
                      fmt::format("run store {}: schema version {} is newer than this program knows ({}); "
                                  "use a newer Echoline or another file",
                                  db.file().string(), *version, kSchemaVersion));
  }
  if (*version == kSchemaVersion) return Status::success();
  if (*version == 0) {
    auto tables = db.query_int("SELECT count(*) FROM sqlite_master WHERE type='table'");
    if (!tables.ok()) return tables.error();
    if (*tables > 0) {
      return make_error(ErrorKind::storage, fmt::format("run store {}: the file holds {} tables but no schema "
                                                        "version: it is not an Echoline run store",
                                                        db.file().string(), *tables));
    }
  }
  if (auto s = db.exec("BEGIN IMMEDIATE"); !s.ok()) return s;
  for (const auto& m : migrations()) {
    if (m.version <= *version) continue;
    auto s = db.exec(m.sql);
    if (s.ok()) s = db.exec(fmt::format("PRAGMA user_version={}", m.version));
    if (!s.ok()) {
      (void)db.exec("ROLLBACK");
      return s.error().with_context(fmt::format("migrating to schema version {} ({})", m.version, m.what));
    }
  }
  if (auto s = db.exec("COMMIT"); !s.ok()) {
    (void)db.exec("ROLLBACK");
    return s;
  }
  return Status::success();
}

Status check_schema_read_only(Database& db, int busy_timeout_ms) {
  sqlite3_busy_timeout(db.handle(), busy_timeout_ms);
  auto version = db.query_int("PRAGMA user_version");
  if (!version.ok()) return version.error();
  const std::string file = db.file().string();
  if (*version > kSchemaVersion) {
    return make_error(ErrorKind::storage,
                      fmt::format("run store {}: schema version {} is newer than this program knows ({}); "
                                  "read it with a newer Echoline",
                                  file, *version, kSchemaVersion));
  }
  if (*version == 0) {
    return make_error(ErrorKind::storage,
                      fmt::format("run store {}: no schema version: it is not an Echoline run store", file));
  }
  if (*version < kSchemaVersion) {
    return make_error(ErrorKind::storage,
                      fmt::format("run store {}: schema version {} is older than this program reads ({}); it is "
                                  "opened read-only and never migrated here: let the station's echolined of this "
                                  "version open it once, or read it with the Echoline that wrote it",
                                  file, *version, kSchemaVersion));
  }
  return Status::success();
}

}  // namespace echoline::store::detail
