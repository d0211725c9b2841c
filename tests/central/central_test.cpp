// The central database as a station and a reader see it, against a real PostgreSQL server made
// by the test fixture (initdb + pg_ctl): schema and roles, the settings file and its
// permissions, passwords kept out of every message, idempotent sends; and the station store's
// outbox that feeds the forwarder.
#include <sys/stat.h>

#include <sqlite3.h>

#include <fstream>
#include <thread>

#include <gtest/gtest.h>
#include <pqxx/pqxx>

#include "daemon/central/documents.hpp"
#include "daemon/central/forwarder.hpp"
#include "daemon/central/reader.hpp"
#include "daemon/central/schema.hpp"
#include "daemon/central/settings.hpp"
#include "daemon/central/writer.hpp"
#include "daemon/core/cal_kit.hpp"
#include "daemon/store/run_store.hpp"
#include "tests/support/postgres_server.hpp"
#include "tests/support/process.hpp"

namespace echoline::central {
namespace {

using testing::PostgresServer;
using testing::TempDir;

core::RunResult sample_run(const std::string& id, const std::string& serial) {
  core::RunResult r;
  r.run_id = id;
  r.serial = serial;
  r.lot = "LOT-7";
  r.station = "bench-a";
  r.operator_name = "op";
  r.recipe = {"whip915", "1", "abc123"};
  r.decision_rule = "guarded";
  r.started_utc = "2026-12-01T10:00:00.000Z";
  r.ended_utc = "2026-12-01T10:00:01.000Z";
  r.verdict = core::Verdict::pass;
  r.metrics.resonance_hz = 915.2e6;
  r.metrics.depth_db = 22.5;
  for (int i = 0; i < 5; ++i) {
    r.points.push_back({900e6 + i * 5e6, -30.0 - i, 10.0 + i, 9.0 + i, i == 4 ? INFINITY : 12.0 + i});
  }
  return r;
}

void write_file(const std::filesystem::path& p, const std::string& text, mode_t mode) {
  std::ofstream(p) << text;
  ::chmod(p.c_str(), mode);
}

TEST(CentralSettings, FileThatGroupOrOthersMayReadIsRefusedWithoutShowingThePassword) {
  TempDir dir;
  const auto file = dir / "central.jsonc";
  write_file(file, R"({"host": "db.example", "user": "bench", "password": "s3cret-Pw"})", 0640);
  auto s = load_settings(file);
  ASSERT_FALSE(s.ok());
  EXPECT_NE(s.error().message.find("mode 0640"), std::string::npos) << s.error().message;
  EXPECT_NE(s.error().message.find("chmod 600"), std::string::npos) << s.error().message;
  EXPECT_EQ(s.error().message.find("s3cret-Pw"), std::string::npos);
  ::chmod(file.c_str(), 0600);
  auto ok = load_settings(file);
  ASSERT_TRUE(ok.ok()) << ok.error().message;
  EXPECT_EQ(ok->description.find("s3cret-Pw"), std::string::npos);
  EXPECT_NE(ok->conninfo.find("password='s3cret-Pw'"), std::string::npos);
}

TEST(CentralSettings, TlsSettingsPassThroughAndBadModeIsNamed) {
  TempDir dir;
  const auto file = dir / "central.jsonc";
  write_file(file, R"({"host": "db", "sslmode": "verify-full", "sslrootcert": "ca.crt", "sslcert": "/etc/c.crt",
                       "sslkey": "/etc/c.key"})",
             0600);
  auto s = load_settings(file);
  ASSERT_TRUE(s.ok()) << s.error().message;
  EXPECT_NE(s->conninfo.find("sslmode='verify-full'"), std::string::npos);
  EXPECT_NE(s->conninfo.find("sslrootcert='" + (dir / "ca.crt").string() + "'"), std::string::npos) << s->conninfo;
  EXPECT_NE(s->conninfo.find("sslkey='/etc/c.key'"), std::string::npos);
  write_file(file, "{\"sslmode\": \"sometimes\"}", 0600);
  auto bad = load_settings(file);
  ASSERT_FALSE(bad.ok());
  EXPECT_NE(bad.error().message.find("/sslmode"), std::string::npos) << bad.error().message;
}

TEST(CentralSettings, ScrubMasksPasswordsInKeyValueAndUriForms) {
  EXPECT_EQ(scrub("host=x password='a b' user=y", ""), "host=x password=******** user=y");
  EXPECT_EQ(scrub("postgresql://bench:pw9@db/echoline", ""), "postgresql://bench:********@db/echoline");
  EXPECT_EQ(scrub("failed for hunter2 here", "hunter2"), "failed for ******** here");
}

class CentralDb : public ::testing::Test {
 protected:
  static void SetUpTestSuite() {
    if (auto why = PostgresServer::unavailable()) return;
    server_ = new PostgresServer();
    pqxx::connection admin(server_->admin_conninfo());
    migrate(admin);
    server_->psql("CREATE ROLE bench LOGIN PASSWORD 'Bench-Pw-41' IN ROLE echoline_station; "
                  "CREATE ROLE quality LOGIN PASSWORD 'Quality-Pw-42' IN ROLE echoline_reader;");
  }
  static void TearDownTestSuite() {
    delete server_;
    server_ = nullptr;
  }
  void SetUp() override {
    if (!server_) GTEST_SKIP() << *PostgresServer::unavailable();
  }
  static CentralSettings settings(const std::string& user, const std::string& password) {
    return settings_from_connection_string(server_->tcp_conninfo(user, password)).value();
  }
  static inline PostgresServer* server_ = nullptr;
};

TEST_F(CentralDb, MigrationIsRecordedAndRepeatingItAppliesNothing) {
  pqxx::connection admin(server_->admin_conninfo());
  EXPECT_EQ(schema_version(admin), kCentralSchemaVersion);
  EXPECT_TRUE(migrate(admin).empty());
}

TEST_F(CentralDb, SendIsIdempotentAndOtherContentUnderTheSameIdIsRefused) {
  CentralWriter w(settings("bench", "Bench-Pw-41"), "00aa11bb22cc33dd", kit_document(core::builtin_conservative_kit()));
  OutgoingRun o;
  o.station_seq = 1;
  o.run = sample_run("run-idem-1", "SN-1");
  o.document = run_document(o.run);
  auto first = w.send({o});
  ASSERT_TRUE(first.ok()) << first.error().message;
  EXPECT_EQ(first->at(0).result, SendResult::stored);
  auto again = w.send({o});
  ASSERT_TRUE(again.ok()) << again.error().message;
  EXPECT_EQ(again->at(0).result, SendResult::already_there);
  OutgoingRun changed = o;
  changed.run.verdict = core::Verdict::fail;
  changed.document = run_document(changed.run);
  auto refused = w.send({changed});
  ASSERT_TRUE(refused.ok()) << refused.error().message;
  EXPECT_EQ(refused->at(0).result, SendResult::different_content);
  EXPECT_EQ(refused->at(0).central_hash, o.document.content_hash);
  EXPECT_EQ(server_->psql("SELECT count(*) FROM echoline.runs WHERE run_id = 'run-idem-1'"), "1\n");

  // The reader gets the run back with its points (+inf best bound included) and the same hash.
  auto reader = CentralReader::open(settings("quality", "Quality-Pw-42"));
  ASSERT_TRUE(reader.ok()) << reader.error().message;
  auto back = (*reader)->load_run("run-idem-1");
  ASSERT_TRUE(back.ok()) << back.error().message;
  ASSERT_EQ(back->points.size(), 5u);
  EXPECT_TRUE(std::isinf(back->points[4].return_loss_best_db));
  EXPECT_EQ(run_document(*back).content_hash, o.document.content_hash);
}

// A calibration id the central database already holds with other content (a second station of
// the same name, a store started over): the run that used this station's calibration is not
// stored, so no run ever points at a calibration that did not judge it. The same calibration sent
// again is simply there.
TEST_F(CentralDb, RunWhoseCalibrationIdHoldsOtherContentIsRefused) {
  CentralWriter w(settings("bench", "Bench-Pw-41"), "00aa11bb22cc33ee", kit_document(core::builtin_conservative_kit()));
  core::CalibrationRecord cal;
  cal.id = "cal-shared-1";
  cal.station = "bench-a";
  cal.created_utc = "2026-12-01T08:00:00.000Z";
  cal.reference_dbm = {-31.1, -31.2};
  cal.valid = true;
  // A run judged with `c`, ready to send.
  auto run_with = [](const core::CalibrationRecord& c, const std::string& id, const std::string& serial) {
    OutgoingRun out;
    out.station_seq = 1;
    out.run = sample_run(id, serial);
    out.run.calibration_id = c.id;
    out.document = run_document(out.run);
    out.calibration = c;
    return out;
  };
  const OutgoingRun o = run_with(cal, "run-cal-1", "SN-11");
  auto first = w.send({o});
  ASSERT_TRUE(first.ok()) << first.error().message;
  EXPECT_EQ(first->at(0).result, SendResult::stored);

  // Another writer (another daemon) with a different calibration under the same id.
  CentralWriter other(settings("bench", "Bench-Pw-41"), "ffee11bb22cc33ee", kit_document(core::builtin_conservative_kit()));
  core::CalibrationRecord other_cal = cal;
  other_cal.reference_dbm = {-30.0, -30.5};
  const OutgoingRun o2 = run_with(other_cal, "run-cal-2", "SN-12");
  auto second = other.send({o2});
  ASSERT_TRUE(second.ok()) << second.error().message;
  EXPECT_EQ(second->at(0).result, SendResult::different_calibration);
  EXPECT_EQ(second->at(0).central_hash, central::calibration_document(cal).content_hash);
  EXPECT_EQ(second->at(0).local_hash, central::calibration_document(*o2.calibration).content_hash);
  EXPECT_EQ(server_->psql("SELECT count(*) FROM echoline.runs WHERE run_id = 'run-cal-2'"), "0\n");

  // The original calibration, invalidated since by the check standard (as the store loads it),
  // from a fresh writer: the same calibration, the run is stored.
  CentralWriter later(settings("bench", "Bench-Pw-41"), "00aa11bb22cc33ee", kit_document(core::builtin_conservative_kit()));
  core::CalibrationRecord invalidated = cal;
  invalidated.valid = false;
  invalidated.errors.push_back("invalidated at 2026-12-01T09:00:00.000Z: check standard drifted 1.4 dB");
  const OutgoingRun o4 = run_with(invalidated, "run-cal-4", "SN-14");
  auto fourth = later.send({o4});
  ASSERT_TRUE(fourth.ok()) << fourth.error().message;
  EXPECT_EQ(fourth->at(0).result, SendResult::stored);

  // The original calibration again, from a fresh writer: already there, the run is stored.
  CentralWriter again(settings("bench", "Bench-Pw-41"), "00aa11bb22cc33ee", kit_document(core::builtin_conservative_kit()));
  const OutgoingRun o3 = run_with(cal, "run-cal-3", "SN-13");
  auto third = again.send({o3});
  ASSERT_TRUE(third.ok()) << third.error().message;
  EXPECT_EQ(third->at(0).result, SendResult::stored);
}

// A run whose calibration the station's store no longer holds (a store edited by hand): the
// forwarder keeps it in the outbox, refused with the calibration's id named, and never sends it
// without the calibration that judged it; the next run of the batch is sent.
TEST_F(CentralDb, RunWhoseCalibrationIsMissingFromTheStoreIsRefusedNotSentWithoutIt) {
  TempDir dir;
  const auto file = dir / "s.sqlite";
  auto st = store::RunStore::open(file);
  ASSERT_TRUE(st.ok()) << st.error().message;
  core::RunResult orphan = sample_run("run-orphan-1", "SN-21");
  orphan.calibration_id = "cal-gone-7";
  ASSERT_TRUE((*st)->save_run(orphan).ok());
  ASSERT_TRUE((*st)->save_run(sample_run("run-plain-2", "SN-22")).ok());
  {
    Forwarder fwd(file, {}, settings("bench", "Bench-Pw-41"), kit_document(core::builtin_conservative_kit()));
    for (int i = 0; i < 300; ++i) {
      auto s = (*st)->outbox_status();
      ASSERT_TRUE(s.ok());
      if (s->depth == 0) break;
      std::this_thread::sleep_for(std::chrono::milliseconds(50));
    }
    fwd.stop();
  }
  auto status = (*st)->outbox_status();
  ASSERT_TRUE(status.ok());
  EXPECT_EQ(status->depth, 0);
  EXPECT_EQ(status->refused, 1);
  EXPECT_EQ(server_->psql("SELECT count(*) FROM echoline.runs WHERE run_id = 'run-orphan-1'"), "0\n");
  EXPECT_EQ(server_->psql("SELECT count(*) FROM echoline.runs WHERE run_id = 'run-plain-2'"), "1\n");
  sqlite3* db = nullptr;
  ASSERT_EQ(sqlite3_open(file.c_str(), &db), SQLITE_OK);
  sqlite3_stmt* q = nullptr;
  ASSERT_EQ(sqlite3_prepare_v2(db, "SELECT refused FROM outbox WHERE run_id = 'run-orphan-1'", -1, &q, nullptr), SQLITE_OK);
  ASSERT_EQ(sqlite3_step(q), SQLITE_ROW);
  const std::string why = reinterpret_cast<const char*>(sqlite3_column_text(q, 0));
  sqlite3_finalize(q);
  sqlite3_close(db);
  EXPECT_NE(why.find("cal-gone-7"), std::string::npos) << why;
}

TEST_F(CentralDb, StationRoleInsertsButCannotReadChangeOrDelete) {
  pqxx::connection station(server_->tcp_conninfo("bench", "Bench-Pw-41"));
  for (const char* sql : {"SELECT document FROM echoline.runs", "UPDATE echoline.runs SET lot = 'x'",
                          "DELETE FROM echoline.runs", "DROP TABLE echoline.runs"}) {
    pqxx::work tx(station);
    EXPECT_THROW(tx.exec(sql), pqxx::sql_error) << sql;
  }
  pqxx::connection reader(server_->tcp_conninfo("quality", "Quality-Pw-42"));
  pqxx::work tx(reader);
  EXPECT_THROW(tx.exec("INSERT INTO echoline.recipes(content_hash, name, version, text) VALUES ('h','n','v','t')"),
               pqxx::sql_error);
}

TEST_F(CentralDb, WrongPasswordAndUnreachableServerNeverShowThePassword) {
  const std::string pw = "Wrong-Pw-Zq81";
  CentralWriter w(settings("bench", pw), "00aa", kit_document(core::builtin_conservative_kit()));
  Status s = w.connect();
  ASSERT_FALSE(s.ok());
  EXPECT_NE(s.error().message.find("bench@127.0.0.1"), std::string::npos) << s.error().message;
  EXPECT_EQ(s.error().message.find(pw), std::string::npos) << s.error().message;
  auto r = CentralReader::open(settings_from_connection_string("postgresql://quality:" + pw +
                                                               "@127.0.0.1:1/echoline?connect_timeout=2")
                                   .value());
  ASSERT_FALSE(r.ok());
  EXPECT_EQ(r.error().message.find(pw), std::string::npos) << r.error().message;
  auto bad = settings_from_connection_string("host=x password=" + pw + " nonsense");
  ASSERT_FALSE(bad.ok());
  EXPECT_EQ(bad.error().message.find(pw), std::string::npos) << bad.error().message;
}

// The outbox lives in the station store: every finished run is queued in the transaction that
// stores it, in commit order; a run in progress is not; a finalized interrupted run is.
TEST(StationOutbox, QueuesFinishedRunsInCommitOrderAndRecordsTheForward) {
  TempDir dir;
  auto st = store::RunStore::open(dir / "s.sqlite");
  ASSERT_TRUE(st.ok()) << st.error().message;
  auto& s = **st;
  auto id = s.instance_id();
  ASSERT_TRUE(id.ok());
  EXPECT_EQ(id->size(), 16u);
  ASSERT_TRUE(s.save_run(sample_run("r2", "SN-2")).ok());
  ASSERT_TRUE(s.begin_run(sample_run("r3", "SN-3")).ok());
  ASSERT_TRUE(s.save_run(sample_run("r1", "SN-1")).ok());
  auto peek = s.outbox_peek(10);
  ASSERT_TRUE(peek.ok());
  ASSERT_EQ(peek->size(), 2u);
  EXPECT_EQ((*peek)[0].run_id, "r2");
  EXPECT_EQ((*peek)[1].run_id, "r1");
  auto fin = s.finalize_interrupted("daemon stopped unexpectedly", "2026-12-01T11:00:00.000Z");
  ASSERT_TRUE(fin.ok());
  auto status = s.outbox_status();
  ASSERT_TRUE(status.ok());
  EXPECT_EQ(status->depth, 3);
  EXPECT_EQ(status->oldest_run_id, "r2");
  EXPECT_EQ(status->last_forward_utc, "");
  ASSERT_TRUE(s.outbox_done({"r2", "r1"}, "2026-12-01T12:00:00.000Z").ok());
  status = s.outbox_status();
  EXPECT_EQ(status->depth, 1);
  EXPECT_EQ(status->oldest_run_id, "r3");
  EXPECT_EQ(status->last_forward_utc, "2026-12-01T12:00:00.000Z");
  EXPECT_EQ(status->last_run_id, "r1");
  EXPECT_EQ(status->forwarded_runs, 2);
  ASSERT_TRUE(s.outbox_refuse("r3", "differs").ok());
  status = s.outbox_status();
  EXPECT_EQ(status->depth, 0);
  EXPECT_EQ(status->refused, 1);
  // The instance id survives reopening; a new store file draws another.
  st->reset();
  auto again = store::RunStore::open(dir / "s.sqlite");
  EXPECT_EQ(*(*again)->instance_id(), *id);
  auto other = store::RunStore::open(dir / "t.sqlite");
  EXPECT_NE(*(*other)->instance_id(), *id);
}

// What the forwarder's write lock costs a test is measured: a save that had to wait for another
// connection's transaction reports the wait, and the counter resets when read.
TEST(StationOutbox, WaitForAnotherConnectionsWriteLockIsCounted) {
  TempDir dir;
  auto st = store::RunStore::open(dir / "s.sqlite");
  ASSERT_TRUE(st.ok()) << st.error().message;
  EXPECT_EQ((*st)->take_lock_wait_ms(), 0.0);
  sqlite3* other = nullptr;
  ASSERT_EQ(sqlite3_open((dir / "s.sqlite").c_str(), &other), SQLITE_OK);
  ASSERT_EQ(sqlite3_exec(other, "BEGIN IMMEDIATE", nullptr, nullptr, nullptr), SQLITE_OK);
  std::thread holder([&] {
    std::this_thread::sleep_for(std::chrono::milliseconds(150));
    sqlite3_exec(other, "COMMIT", nullptr, nullptr, nullptr);
  });
  EXPECT_TRUE((*st)->save_run(sample_run("r-wait", "SN-W")).ok());
  holder.join();
  sqlite3_close(other);
  EXPECT_GT((*st)->take_lock_wait_ms(), 0.0);
  EXPECT_EQ((*st)->take_lock_wait_ms(), 0.0);
}

}  // namespace
}  // namespace echoline::central
