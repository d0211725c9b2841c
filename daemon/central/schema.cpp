// Central schema history. Never edit a released step: append one and raise kCentralSchemaVersion.
#include "daemon/central/schema.hpp"

#include <stdexcept>

#include <fmt/format.h>

namespace echoline::central {
namespace {

// Version 1: stations send runs (with their points inside the run document), the calibrations
// they used, recipe texts and kit definitions by content hash. Every row keeps the content hash
// it was sent with, so a repeated send is recognised and a different content under the same key
// is refused. The documents are the station's own JSON export forms (daemon/store/README.md).
constexpr const char* kVersion1 = R"sql(
DO $roles$ BEGIN
  IF NOT EXISTS (SELECT FROM pg_roles WHERE rolname = 'echoline_station') THEN
    CREATE ROLE echoline_station NOLOGIN;
  END IF;
  IF NOT EXISTS (SELECT FROM pg_roles WHERE rolname = 'echoline_reader') THEN
    CREATE ROLE echoline_reader NOLOGIN;
  END IF;
END $roles$;
CREATE TABLE echoline.recipes (
  content_hash text PRIMARY KEY,
  name text NOT NULL,
  version text NOT NULL,
  text text NOT NULL,
  received_at timestamptz NOT NULL DEFAULT now()
);
CREATE TABLE echoline.kits (
  content_hash text PRIMARY KEY,
  identity text NOT NULL,
  serial text NOT NULL,
  definition text NOT NULL,
  received_at timestamptz NOT NULL DEFAULT now()
);
CREATE TABLE echoline.calibrations (
  id text PRIMARY KEY,
  station text NOT NULL,
  station_instance text NOT NULL,
  created_utc text NOT NULL,
  kit_hash text REFERENCES echoline.kits(content_hash),
  content_hash text NOT NULL,
  document json NOT NULL,
  received_at timestamptz NOT NULL DEFAULT now()
);
CREATE TABLE echoline.runs (
  run_id text PRIMARY KEY,
  station text NOT NULL,
  station_instance text NOT NULL,
  station_seq bigint NOT NULL,
  serial text NOT NULL,
  lot text NOT NULL,
  operator text NOT NULL,
  recipe_hash text NOT NULL,
  calibration_id text NOT NULL,
  started_utc text NOT NULL,
  ended_utc text NOT NULL,
  verdict text NOT NULL CHECK (verdict IN ('pass', 'fail', 'inconclusive', 'aborted')),
  failure_class text NOT NULL,
  retest boolean NOT NULL,
  resonance_hz double precision,
  depth_db double precision,
  min_margin_db double precision,
  points_count integer NOT NULL,
  software text NOT NULL,
  content_hash text NOT NULL,
  document json NOT NULL,
  received_at timestamptz NOT NULL DEFAULT now()
);
CREATE INDEX runs_by_lot ON echoline.runs(lot, started_utc, run_id);
CREATE INDEX runs_by_serial ON echoline.runs(serial, started_utc, run_id);
CREATE INDEX runs_by_station ON echoline.runs(station_instance, station_seq);
-- One row per stored point, for SQL users: the points live in the run document as arrays
-- [frequency_hz, raw_dbm, return_loss_db, worst_db, best_db]; a null best bound means +infinity.
CREATE VIEW echoline.run_points AS
  SELECT r.run_id, (p.ordinality - 1)::integer AS idx,
         (p.value->>0)::double precision AS frequency_hz, (p.value->>1)::double precision AS raw_dbm,
         (p.value->>2)::double precision AS return_loss_db, (p.value->>3)::double precision AS return_loss_worst_db,
         (p.value->>4)::double precision AS return_loss_best_db
  FROM echoline.runs r, json_array_elements(r.document->'points') WITH ORDINALITY AS p;
GRANT USAGE ON SCHEMA echoline TO echoline_station, echoline_reader;
GRANT SELECT ON echoline.migrations TO echoline_station, echoline_reader;
-- Stations insert; they read nothing back but the keys and content hashes of what they sent.
GRANT INSERT ON echoline.recipes, echoline.kits, echoline.calibrations, echoline.runs TO echoline_station;
GRANT SELECT (content_hash) ON echoline.recipes, echoline.kits TO echoline_station;
GRANT SELECT (id, content_hash) ON echoline.calibrations TO echoline_station;
GRANT SELECT (run_id, content_hash) ON echoline.runs TO echoline_station;
GRANT SELECT ON echoline.recipes, echoline.kits, echoline.calibrations, echoline.runs, echoline.run_points
  TO echoline_reader;
)sql";

}  // namespace

const std::vector<CentralMigration>& central_migrations() {
  static const std::vector<CentralMigration> steps = {
      {1, "runs, calibrations, recipes and kits by content hash; station and reader roles", kVersion1},
  };
  return steps;
}

int schema_version(pqxx::connection& conn) {
  pqxx::read_transaction tx(conn);
  auto exists = tx.exec1("SELECT to_regclass('echoline.migrations') IS NOT NULL");
  if (!exists[0].as<bool>()) return 0;
  auto v = tx.exec1("SELECT coalesce(max(version), 0) FROM echoline.migrations");
  return v[0].as<int>();
}

std::vector<int> migrate(pqxx::connection& conn) {
  {
    pqxx::work tx(conn);
    tx.exec0("CREATE SCHEMA IF NOT EXISTS echoline");
    tx.exec0(
        "CREATE TABLE IF NOT EXISTS echoline.migrations (version integer PRIMARY KEY, what text NOT NULL, "
        "applied_at timestamptz NOT NULL DEFAULT now())");
    tx.commit();
  }
  const int have = schema_version(conn);
  if (have > kCentralSchemaVersion) {
    throw std::runtime_error(fmt::format("central database: schema version {} is newer than this program knows ({})",
                                         have, kCentralSchemaVersion));
  }
  std::vector<int> applied;
  for (const auto& m : central_migrations()) {
    if (m.version <= have) continue;
    pqxx::work tx(conn);
    tx.exec(m.sql);
    tx.exec_params0("INSERT INTO echoline.migrations(version, what) VALUES ($1, $2)", m.version, std::string(m.what));
    tx.commit();
    applied.push_back(m.version);
  }
  return applied;
}

}  // namespace echoline::central
