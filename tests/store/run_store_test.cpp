// RunStore on real SQLite files: schema and migration, pragmas, ordering, retests, aborted runs,
// hostile serials, calibrations, yield.
#include "daemon/store/run_store.hpp"

#include <gtest/gtest.h>
#include <sqlite3.h>

#include <cmath>
#include <limits>

#include "tests/store/store_test_data.hpp"

namespace echoline::store {
namespace {

using testdata::make_run;

class RunStoreTest : public ::testing::Test {
 protected:
  void SetUp() override {
    dir_ = testdata::temp_dir("runs");
    file_ = dir_ / "station.db";
    auto s = RunStore::open(file_);
    ASSERT_TRUE(s.ok()) << s.error().message;
    store_ = std::move(*s);
  }
  void TearDown() override {
    store_.reset();
    std::filesystem::remove_all(dir_);
  }
  // Runs SQL on a second, plain connection and returns the first column of the first row.
  std::string sql(const std::string& q) {
    sqlite3* db = nullptr;
    sqlite3_open(file_.c_str(), &db);
    sqlite3_stmt* st = nullptr;
    std::string out;
    if (sqlite3_prepare_v2(db, q.c_str(), -1, &st, nullptr) == SQLITE_OK && sqlite3_step(st) == SQLITE_ROW) {
      const auto* t = sqlite3_column_text(st, 0);
      out = t ? reinterpret_cast<const char*>(t) : "NULL";
    }
    sqlite3_finalize(st);
    sqlite3_close(db);
    return out;
  }
  std::filesystem::path dir_, file_;
  std::unique_ptr<RunStore> store_;
};

TEST_F(RunStoreTest, NewFileHasCurrentSchemaAndWal) {
  EXPECT_EQ(sql("PRAGMA user_version"), std::to_string(kSchemaVersion));
  EXPECT_EQ(sql("PRAGMA journal_mode"), "wal");  // journal_mode=WAL persists in the file (SQLite docs, wal.html)
  auto ok = store_->integrity_check();
  ASSERT_TRUE(ok.ok());
  EXPECT_EQ(*ok, "ok");
}

TEST_F(RunStoreTest, RunRoundTripsWithEveryField) {
  auto run = make_run("WH915A-0001", "L1", 0, 915e6, core::Verdict::fail, core::FailureClass::tuned_low);
  run.instruments["switch"] = "Echoline,SIM-SW,\"x\",1";
  run.reason = "it's \"low\"; cut it";
  run.points[100].return_loss_best_db = std::numeric_limits<double>::infinity();
  ASSERT_TRUE(store_->save_run(run).ok());
  auto back = store_->load_run(run.run_id);
  ASSERT_TRUE(back.ok()) << back.error().message;
  EXPECT_EQ(back->serial, run.serial);
  EXPECT_EQ(back->instruments, run.instruments);
  EXPECT_EQ(back->reason, run.reason);
  EXPECT_EQ(back->verdict, core::Verdict::fail);
  EXPECT_EQ(back->failure_class, core::FailureClass::tuned_low);
  EXPECT_EQ(back->recipe.content_hash, run.recipe.content_hash);
  EXPECT_EQ(back->temperature_c, run.temperature_c);
  ASSERT_TRUE(back->trim.has_value());
  EXPECT_EQ(back->trim->text, run.trim->text);
  EXPECT_EQ(back->metrics.resonance_hz, run.metrics.resonance_hz);
  EXPECT_FALSE(back->metrics.resonance_low_hz);   // not set by make_run: stays absent (NULL)
  ASSERT_EQ(back->points.size(), 201u);
  for (std::size_t i = 0; i < run.points.size(); ++i) {
    EXPECT_EQ(back->points[i].frequency_hz, run.points[i].frequency_hz);
    EXPECT_EQ(back->points[i].return_loss_db, run.points[i].return_loss_db);
    EXPECT_EQ(back->points[i].return_loss_best_db, run.points[i].return_loss_best_db);  // +inf kept
  }
  // +inf best bound is stored as NULL (documented sentinel).
  EXPECT_NE(sql("SELECT count(*) FROM readings WHERE rl_best_db IS NULL"), "0");
}

// A run with the offset pair keeps each point's second raw reading (schema 12); a run without
// one reads back NaN, and offset_readings() gives none.
TEST_F(RunStoreTest, TheOffsetLineReadingsRoundTrip) {
  auto run = make_run("WH915A-0002", "L1", 1, 915e6, core::Verdict::pass, core::FailureClass::none);
  for (std::size_t i = 0; i < run.points.size(); ++i) run.points[i].offset_raw_dbm = -40.0 - 0.01 * static_cast<double>(i);
  ASSERT_TRUE(store_->save_run(run).ok());
  auto back = store_->load_run(run.run_id);
  ASSERT_TRUE(back.ok()) << back.error().message;
  ASSERT_EQ(back->points.size(), run.points.size());
  for (std::size_t i = 0; i < run.points.size(); ++i) EXPECT_EQ(back->points[i].offset_raw_dbm, run.points[i].offset_raw_dbm);
  const std::vector<core::Reading> offset = core::offset_readings(*back);
  ASSERT_EQ(offset.size(), run.points.size());
  EXPECT_EQ(offset[7].raw_dbm, -40.07);
  EXPECT_EQ(offset[7].frequency_hz, run.points[7].frequency_hz);

  auto plain = make_run("WH915A-0003", "L1", 2, 915e6, core::Verdict::pass, core::FailureClass::none);
  ASSERT_TRUE(store_->save_run(plain).ok());
  auto plain_back = store_->load_run(plain.run_id);
  ASSERT_TRUE(plain_back.ok());
  EXPECT_TRUE(std::isnan(plain_back->points[0].offset_raw_dbm));
  EXPECT_TRUE(core::offset_readings(*plain_back).empty());
  EXPECT_EQ(sql("SELECT count(*) FROM readings WHERE offset_raw_dbm IS NOT NULL"), std::to_string(run.points.size()));
}

TEST_F(RunStoreTest, HistoryIsOrderedByStartThenInsertion) {
  ASSERT_TRUE(store_->save_run(make_run("U1", "L1", 30, 915e6)).ok());
  ASSERT_TRUE(store_->save_run(make_run("U1", "L1", 10, 915e6)).ok());
  auto same_start = make_run("U1", "L1", 20, 915e6);
  ASSERT_TRUE(store_->save_run(same_start).ok());
  same_start.run_id += "-b";
  ASSERT_TRUE(store_->save_run(same_start).ok());
  auto h = store_->history("U1");
  ASSERT_TRUE(h.ok());
  ASSERT_EQ(h->size(), 4u);
  EXPECT_EQ((*h)[0].started_utc, testdata::utc_at(10));
  EXPECT_EQ((*h)[1].run_id, make_run("U1", "L1", 20, 915e6).run_id);
  EXPECT_EQ((*h)[2].run_id, same_start.run_id);
  EXPECT_EQ((*h)[3].started_utc, testdata::utc_at(30));
  EXPECT_TRUE((*h)[0].points.empty());  // points omitted unless asked
  auto u = store_->unit("U1");
  ASSERT_TRUE(u.ok() && u->has_value());
  EXPECT_EQ((*u)->run_count, 4);
  EXPECT_EQ((*u)->first_seen_utc, testdata::utc_at(10));
  EXPECT_EQ((*u)->last_seen_utc, testdata::utc_at(30));
}

TEST_F(RunStoreTest, RetestIsANewRunNeverAnOverwrite) {
  auto first = make_run("U2", "L1", 1, 930e6, core::Verdict::fail, core::FailureClass::tuned_high);
  ASSERT_TRUE(store_->save_run(first).ok());
  auto again = store_->save_run(first);
  ASSERT_FALSE(again.ok());
  EXPECT_EQ(again.error().kind, ErrorKind::invalid_argument);
  EXPECT_NE(again.error().message.find("already stored"), std::string::npos);
  auto retest = make_run("U2", "L1", 2, 915e6);
  retest.retest = true;
  ASSERT_TRUE(store_->save_run(retest).ok());
  auto h = store_->history("U2", true);
  ASSERT_TRUE(h.ok());
  ASSERT_EQ(h->size(), 2u);
  EXPECT_EQ((*h)[0].verdict, core::Verdict::fail);
  EXPECT_FALSE((*h)[0].retest);
  EXPECT_EQ((*h)[1].verdict, core::Verdict::pass);
  EXPECT_TRUE((*h)[1].retest);
  EXPECT_EQ((*h)[0].points.size(), 201u);
  EXPECT_EQ(*store_->run_count("U2"), 2);
  EXPECT_EQ((*store_->unit("U2"))->last_verdict, "pass");
}

TEST_F(RunStoreTest, AbortedRunKeepsPartialReadingsAndReason) {
  auto run = make_run("U3", "L1", 5, 915e6, core::Verdict::aborted, core::FailureClass::none, 201);
  run.points.resize(57);
  run.reason = "receiver (tcp://127.0.0.1:5025): *OPC? timed out after 30000 ms";
  run.metrics.resonance_hz.reset();
  ASSERT_TRUE(store_->save_run(run).ok());
  auto back = store_->load_run(run.run_id);
  ASSERT_TRUE(back.ok());
  EXPECT_EQ(back->verdict, core::Verdict::aborted);
  EXPECT_EQ(back->points.size(), 57u);
  EXPECT_EQ(back->reason, run.reason);
  EXPECT_FALSE(back->metrics.resonance_hz.has_value());
  EXPECT_EQ(sql("SELECT points_count FROM runs WHERE run_id='" + run.run_id + "'"), "57");
}

TEST_F(RunStoreTest, HostileSerialsAreRefusedAndNothingIsStored) {
  const std::vector<std::string> hostile = {"../x", "a\"b", "it's", "'; DROP TABLE runs;--", "ab\x01",
                                            std::string(10000, 'A'), "", "ab\xff\xfe", "..", "a\nb"};
  for (const auto& serial : hostile) {
    auto run = make_run("tmp", "L1", 1, 915e6);
    run.serial = serial;
    run.run_id = "hostile-" + std::to_string(&serial - hostile.data());
    auto s = store_->save_run(run);
    ASSERT_FALSE(s.ok());
    EXPECT_EQ(s.error().kind, ErrorKind::invalid_argument);
    EXPECT_NE(s.error().message.find("rejected"), std::string::npos) << s.error().message;
  }
  EXPECT_EQ(sql("SELECT count(*) FROM runs"), "0");
  EXPECT_EQ(sql("SELECT count(*) FROM readings"), "0");
  EXPECT_EQ(sql("SELECT count(*) FROM units"), "0");
  EXPECT_EQ(sql("SELECT count(*) FROM sqlite_master WHERE name='runs'"), "1");
}

TEST_F(RunStoreTest, StationPatternIsUsedForSaves) {
  store_.reset();
  StoreOptions o;
  o.serial_pattern = "^WH915[A-Z]-[0-9]{4}$";
  auto s = RunStore::open(file_, o);
  ASSERT_TRUE(s.ok());
  EXPECT_TRUE((*s)->save_run(make_run("WH915A-0001", "L1", 1, 915e6)).ok());
  EXPECT_FALSE((*s)->save_run(make_run("WH915A-01", "L1", 2, 915e6)).ok());
}

TEST_F(RunStoreTest, LotAndTimeRangeQueries) {
  ASSERT_TRUE(store_->save_run(make_run("A1", "LA", 1, 915e6)).ok());
  ASSERT_TRUE(store_->save_run(make_run("A2", "LA", 2, 915e6)).ok());
  ASSERT_TRUE(store_->save_run(make_run("B1", "LB", 3, 915e6)).ok());
  auto la = store_->lot_runs("LA", false);
  ASSERT_TRUE(la.ok());
  EXPECT_EQ(la->size(), 2u);
  auto range = store_->runs_between(testdata::utc_at(2), testdata::utc_at(3));
  ASSERT_TRUE(range.ok());
  ASSERT_EQ(range->size(), 1u);
  EXPECT_EQ((*range)[0].serial, "A2");
  auto missing = store_->load_run("no-such-run");
  ASSERT_FALSE(missing.ok());
  EXPECT_NE(missing.error().message.find("no run 'no-such-run'"), std::string::npos);
}

TEST_F(RunStoreTest, LatestCalibrationWithTraces) {
  auto none = store_->latest_calibration();
  ASSERT_TRUE(none.ok());
  EXPECT_FALSE(none->has_value());
  ASSERT_TRUE(store_->save_calibration(testdata::make_calibration("cal-1", "2026-03-02T07:00:00.000Z")).ok());
  auto cal2 = testdata::make_calibration("cal-2", "2026-03-02T09:00:00.000Z");
  cal2.errors = {"LOAD reads above the noise floor by only 3 dB"};
  ASSERT_TRUE(store_->save_calibration(cal2).ok());
  ASSERT_TRUE(store_->save_calibration(testdata::make_calibration("cal-0", "2026-03-01T09:00:00.000Z")).ok());
  ASSERT_TRUE(store_->set_calibration_units("cal-2", 17, 7).ok());
  auto latest = store_->latest_calibration();
  ASSERT_TRUE(latest.ok() && latest->has_value());
  const auto& c = **latest;
  EXPECT_EQ(c.id, "cal-2");
  EXPECT_EQ(c.units_since, 17);
  EXPECT_EQ(c.units_since_check, 7);
  EXPECT_EQ(c.traces.size(), 3u);
  EXPECT_EQ(c.traces.at("LOAD").size(), 201u);
  EXPECT_EQ(c.traces.at("LOAD")[3].raw_dbm, testdata::make_calibration("x", "y").traces.at("LOAD")[3].raw_dbm);
  EXPECT_EQ(c.reference_dbm, testdata::make_calibration("x", "y").reference_dbm);
  EXPECT_EQ(c.warnings.size(), 1u);
  EXPECT_EQ(c.errors, cal2.errors);
  EXPECT_DOUBLE_EQ(c.min_directivity_db, 29.5);
  EXPECT_FALSE(store_->save_calibration(testdata::make_calibration("cal-2", "z")).ok());
}

// The resonance bound interval (schema version 4) is stored and read back; an open side is NULL.
TEST_F(RunStoreTest, ResonanceIntervalRoundTrips) {
  auto run = make_run("WH915A-0002", "L1", 0, 924.4e6, core::Verdict::inconclusive);
  run.metrics.resonance_low_hz = 921.8e6;
  run.metrics.resonance_high_hz = 926.9e6;
  ASSERT_TRUE(store_->save_run(run).ok());
  auto open_high = make_run("WH915A-0003", "L1", 1, 968e6, core::Verdict::fail, core::FailureClass::tuned_high);
  open_high.metrics.resonance_low_hz = 955.25e6;
  ASSERT_TRUE(store_->save_run(open_high).ok());
  auto back = store_->load_run(run.run_id);
  ASSERT_TRUE(back.ok()) << back.error().message;
  EXPECT_EQ(back->metrics.resonance_low_hz, 921.8e6);
  EXPECT_EQ(back->metrics.resonance_high_hz, 926.9e6);
  auto lot = store_->lot_runs("L1", false);
  ASSERT_TRUE(lot.ok());
  ASSERT_EQ(lot->size(), 2u);
  EXPECT_EQ((*lot)[1].metrics.resonance_low_hz, 955.25e6);
  EXPECT_FALSE((*lot)[1].metrics.resonance_high_hz);
  EXPECT_EQ(sql("SELECT count(*) FROM runs WHERE resonance_high_hz IS NULL"), "1");
}

// A calibration invalidated after it was made (check-standard drift) stays invalid across a
// close and reopen of the file, with the reason among its errors; the other records are untouched.
TEST_F(RunStoreTest, InvalidatedCalibrationStaysInvalidAfterReopen) {
  ASSERT_TRUE(store_->save_calibration(testdata::make_calibration("cal-1", "2026-03-02T07:00:00.000Z")).ok());
  ASSERT_TRUE(store_->save_calibration(testdata::make_calibration("cal-2", "2026-03-02T09:00:00.000Z")).ok());
  auto before = store_->latest_calibration();
  ASSERT_TRUE(before.ok() && before->has_value());
  ASSERT_TRUE((**before).valid);
  const std::string why = "check standard drifted: OPEN moved 0.8 dB at 915.0 MHz (limit 0.3 dB)";
  ASSERT_TRUE(store_->invalidate_calibration("cal-2", why).ok());
  // A second invalidation keeps the first reason.
  ASSERT_TRUE(store_->invalidate_calibration("cal-2", "later reason").ok());

  store_.reset();
  auto reopened = RunStore::open(file_);
  ASSERT_TRUE(reopened.ok()) << reopened.error().message;
  store_ = std::move(*reopened);
  auto latest = store_->latest_calibration();
  ASSERT_TRUE(latest.ok() && latest->has_value());
  const auto& c = **latest;
  EXPECT_EQ(c.id, "cal-2");
  EXPECT_FALSE(c.valid);
  ASSERT_EQ(c.errors.size(), 1u);
  EXPECT_NE(c.errors[0].find("invalidated at 20"), std::string::npos) << c.errors[0];
  EXPECT_NE(c.errors[0].find(why), std::string::npos) << c.errors[0];
  EXPECT_EQ(c.errors[0].find("later reason"), std::string::npos) << c.errors[0];
  EXPECT_EQ(c.traces.size(), 3u);   // the record itself is kept for the audit trail
  // The time is in the station's form YYYY-MM-DDTHH:MM:SS.fffZ (24 characters).
  EXPECT_EQ(sql("SELECT length(invalidated_utc) FROM calibrations WHERE id = 'cal-2'"), "24");
  auto other = store_->load_calibration("cal-1");
  ASSERT_TRUE(other.ok() && other->has_value());
  EXPECT_TRUE((**other).valid);
  EXPECT_TRUE((**other).errors.empty());

  auto unknown = store_->invalidate_calibration("cal-9", why);
  ASSERT_FALSE(unknown.ok());
  EXPECT_EQ(unknown.error().kind, ErrorKind::invalid_argument);
  EXPECT_NE(unknown.error().message.find("no calibration 'cal-9'"), std::string::npos) << unknown.error().message;
  EXPECT_FALSE(store_->invalidate_calibration("cal-1", "").ok());
}

TEST_F(RunStoreTest, YieldCountsFirstPassAndFinal) {
  using core::Verdict;
  using core::FailureClass;
  // U1 pass; U2 fail then pass (retest); U3 fail twice; U4 aborted then pass; U5 only aborted.
  ASSERT_TRUE(store_->save_run(make_run("U1", "LY", 1, 915e6)).ok());
  ASSERT_TRUE(store_->save_run(make_run("U2", "LY", 2, 935e6, Verdict::fail, FailureClass::tuned_high)).ok());
  ASSERT_TRUE(store_->save_run(make_run("U2", "LY", 3, 915e6)).ok());
  ASSERT_TRUE(store_->save_run(make_run("U3", "LY", 4, 900e6, Verdict::fail, FailureClass::tuned_low)).ok());
  ASSERT_TRUE(store_->save_run(make_run("U3", "LY", 5, 900e6, Verdict::inconclusive, FailureClass::tuned_low)).ok());
  ASSERT_TRUE(store_->save_run(make_run("U4", "LY", 6, 915e6, Verdict::aborted)).ok());
  ASSERT_TRUE(store_->save_run(make_run("U4", "LY", 7, 915e6)).ok());
  ASSERT_TRUE(store_->save_run(make_run("U5", "LY", 8, 915e6, Verdict::aborted)).ok());
  ASSERT_TRUE(store_->save_run(make_run("X1", "OTHER", 9, 915e6)).ok());
  auto y = store_->yield_by(YieldGroup::lot, "LY");
  ASSERT_TRUE(y.ok());
  ASSERT_EQ(y->size(), 1u);
  const auto& s = (*y)[0];
  EXPECT_EQ(s.runs, 8);
  EXPECT_EQ(s.runs_by_verdict.at("pass"), 3);
  EXPECT_EQ(s.runs_by_verdict.at("fail"), 2);
  EXPECT_EQ(s.runs_by_verdict.at("inconclusive"), 1);
  EXPECT_EQ(s.runs_by_verdict.at("aborted"), 2);
  EXPECT_EQ(s.runs_by_class.at("tuned-low"), 2);
  EXPECT_EQ(s.units_tested, 4);       // U5 never finished a run
  EXPECT_EQ(s.units_first_pass, 2);   // U1, U4 (its abort is not an attempt)
  EXPECT_EQ(s.units_final_pass, 3);   // U1, U2, U4
  EXPECT_DOUBLE_EQ(s.first_pass_yield, 0.5);
  EXPECT_DOUBLE_EQ(s.final_yield, 0.75);
  auto by_station = store_->yield_by(YieldGroup::station);
  ASSERT_TRUE(by_station.ok());
  ASSERT_EQ(by_station->size(), 1u);
  EXPECT_EQ((*by_station)[0].runs, 9);
  auto by_recipe = store_->yield_by(YieldGroup::recipe);
  ASSERT_TRUE(by_recipe.ok());
  EXPECT_EQ((*by_recipe)[0].group, "whip-915");
}

// Version 1 as released: written out here by hand, independent of the code's migration table.
constexpr const char* kV1 = R"sql(
CREATE TABLE units (serial TEXT PRIMARY KEY, first_seen_utc TEXT NOT NULL, last_seen_utc TEXT NOT NULL,
  last_verdict TEXT NOT NULL, run_count INTEGER NOT NULL);
CREATE TABLE runs (seq INTEGER PRIMARY KEY AUTOINCREMENT, run_id TEXT NOT NULL UNIQUE,
  serial TEXT NOT NULL REFERENCES units(serial), lot TEXT NOT NULL, recipe_name TEXT NOT NULL,
  recipe_version TEXT NOT NULL, recipe_hash TEXT NOT NULL, decision_rule TEXT NOT NULL, station TEXT NOT NULL,
  operator TEXT NOT NULL, instruments_json TEXT NOT NULL, started_utc TEXT NOT NULL, ended_utc TEXT NOT NULL,
  temperature_c REAL, calibration_id TEXT NOT NULL, retest INTEGER NOT NULL,
  verdict TEXT NOT NULL CHECK (verdict IN ('pass','fail','inconclusive','aborted')), failure_class TEXT NOT NULL,
  reason TEXT NOT NULL, resonance_hz REAL, depth_db REAL, bandwidth_hz REAL, band_low_hz REAL, band_high_hz REAL,
  min_margin_db REAL, vswr_at_resonance REAL, mismatch_loss_db REAL, directivity_db REAL,
  trim_element_length_mm REAL, trim_change_mm REAL, trim_measured_hz REAL, trim_target_hz REAL, trim_text TEXT,
  total_s REAL, sweep_s REAL, analysis_s REAL, points_count INTEGER NOT NULL);
CREATE TABLE readings (run_id TEXT NOT NULL REFERENCES runs(run_id), idx INTEGER NOT NULL,
  frequency_hz REAL NOT NULL, raw_dbm REAL, rl_db REAL, rl_worst_db REAL, rl_best_db REAL,
  PRIMARY KEY (run_id, idx)) WITHOUT ROWID;
CREATE TABLE calibrations (seq INTEGER PRIMARY KEY AUTOINCREMENT, id TEXT NOT NULL UNIQUE, created_utc TEXT NOT NULL,
  recipe_name TEXT NOT NULL, recipe_version TEXT NOT NULL, recipe_hash TEXT NOT NULL, station TEXT NOT NULL,
  instruments_json TEXT NOT NULL, temperature_c REAL, reference_json TEXT NOT NULL, directivity_json TEXT NOT NULL,
  min_directivity_db REAL, warnings_json TEXT NOT NULL, valid INTEGER NOT NULL, max_age_s REAL NOT NULL,
  max_units INTEGER NOT NULL, max_temperature_change_c REAL NOT NULL);
CREATE TABLE calibration_traces (calibration_id TEXT NOT NULL REFERENCES calibrations(id), standard TEXT NOT NULL,
  idx INTEGER NOT NULL, frequency_hz REAL NOT NULL, raw_dbm REAL, PRIMARY KEY (calibration_id, standard, idx)) WITHOUT ROWID;
INSERT INTO units VALUES ('OLD-1', '2025-11-01T10:00:00.000Z', '2025-11-01T10:00:00.000Z', 'pass', 1);
INSERT INTO runs (run_id, serial, lot, recipe_name, recipe_version, recipe_hash, decision_rule, station, operator,
  instruments_json, started_utc, ended_utc, calibration_id, retest, verdict, failure_class, reason, depth_db,
  points_count) VALUES ('old-run', 'OLD-1', 'L0', 'whip-915', '1', 'abc', 'simple', 'bench0', 'op', '{}',
  '2025-11-01T10:00:00.000Z', '2025-11-01T10:00:05.000Z', 'cal-old', 0, 'pass', '', 'ok', 18.5, 2);
INSERT INTO readings VALUES ('old-run', 0, 902e6, -30, 18, 17, 19), ('old-run', 1, 928e6, -25, 12, 11, NULL);
INSERT INTO calibrations (id, created_utc, recipe_name, recipe_version, recipe_hash, station, instruments_json,
  reference_json, directivity_json, min_directivity_db, warnings_json, valid, max_age_s, max_units,
  max_temperature_change_c) VALUES ('cal-old', '2025-11-01T09:00:00.000Z', 'whip-915', '1', 'abc', 'bench0', '{}',
  '[-20.0,-20.1]', '[30.0,31.0]', 30.0, '[]', 1, 28800, 500, 5);
PRAGMA user_version = 1;
)sql";

TEST(RunStoreSchema, Version1FileIsMigratedToCurrent) {
  const auto dir = testdata::temp_dir("v1");
  const auto file = dir / "old.db";
  sqlite3* db = nullptr;
  ASSERT_EQ(sqlite3_open(file.c_str(), &db), SQLITE_OK);
  ASSERT_EQ(sqlite3_exec(db, kV1, nullptr, nullptr, nullptr), SQLITE_OK) << sqlite3_errmsg(db);
  sqlite3_close(db);

  auto store = RunStore::open(file);
  ASSERT_TRUE(store.ok()) << store.error().message;
  auto old = (*store)->load_run("old-run");
  ASSERT_TRUE(old.ok()) << old.error().message;
  EXPECT_EQ(old->serial, "OLD-1");
  ASSERT_EQ(old->points.size(), 2u);
  EXPECT_TRUE(std::isinf(old->points[1].return_loss_best_db));
  auto cal = (*store)->latest_calibration();
  ASSERT_TRUE(cal.ok() && cal->has_value());
  EXPECT_EQ((**cal).units_since, 0);   // column added by version 2 with its default
  EXPECT_EQ((**cal).noise_margin_db, 0);
  EXPECT_TRUE((**cal).errors.empty());   // column added by version 3
  EXPECT_TRUE((**cal).valid);             // version 5's invalidation columns start NULL
  EXPECT_FALSE(old->metrics.resonance_low_hz);   // version 4's columns start NULL
  EXPECT_TRUE((*store)->save_run(make_run("NEW-1", "L0", 1, 915e6)).ok());
  store->reset();

  ASSERT_EQ(sqlite3_open(file.c_str(), &db), SQLITE_OK);
  sqlite3_stmt* st = nullptr;
  sqlite3_prepare_v2(db, "PRAGMA user_version", -1, &st, nullptr);
  ASSERT_EQ(sqlite3_step(st), SQLITE_ROW);
  EXPECT_EQ(sqlite3_column_int(st, 0), kSchemaVersion);
  sqlite3_finalize(st);
  sqlite3_prepare_v2(db, "SELECT count(*) FROM sqlite_master WHERE type='index' AND name='runs_by_lot'", -1, &st, nullptr);
  ASSERT_EQ(sqlite3_step(st), SQLITE_ROW);
  EXPECT_EQ(sqlite3_column_int(st, 0), 1);
  sqlite3_finalize(st);
  sqlite3_close(db);
  std::filesystem::remove_all(dir);
}

TEST(RunStoreSchema, NewerFileIsRefusedClearly) {
  const auto dir = testdata::temp_dir("newer");
  const auto file = dir / "future.db";
  { auto s = RunStore::open(file); ASSERT_TRUE(s.ok()); }
  sqlite3* db = nullptr;
  sqlite3_open(file.c_str(), &db);
  sqlite3_exec(db, "PRAGMA user_version = 99", nullptr, nullptr, nullptr);
  sqlite3_close(db);
  auto s = RunStore::open(file);
  ASSERT_FALSE(s.ok());
  EXPECT_EQ(s.error().kind, ErrorKind::storage);
  EXPECT_NE(s.error().message.find("schema version 99 is newer than this program knows (" +
                                   std::to_string(kSchemaVersion) + ")"), std::string::npos) << s.error().message;
  std::filesystem::remove_all(dir);
}

TEST(RunStoreSchema, ForeignSqliteFileAndGarbageAreRefused) {
  const auto dir = testdata::temp_dir("foreign");
  sqlite3* db = nullptr;
  sqlite3_open((dir / "other.db").c_str(), &db);
  sqlite3_exec(db, "CREATE TABLE t(x)", nullptr, nullptr, nullptr);
  sqlite3_close(db);
  auto s = RunStore::open(dir / "other.db");
  ASSERT_FALSE(s.ok());
  EXPECT_NE(s.error().message.find("not an Echoline run store"), std::string::npos);
  { std::FILE* f = std::fopen((dir / "junk.db").c_str(), "w"); std::fputs(std::string(5000, 'j').c_str(), f); std::fclose(f); }
  auto g = RunStore::open(dir / "junk.db");
  ASSERT_FALSE(g.ok());
  EXPECT_EQ(g.error().kind, ErrorKind::storage);
  EXPECT_NE(g.error().message.find("junk.db"), std::string::npos);
  std::filesystem::remove_all(dir);
}

}  // namespace
}  // namespace echoline::store
