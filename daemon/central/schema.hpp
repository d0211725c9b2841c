// The central PostgreSQL database's schema (all in the schema "echoline"): ordered migrations,
// the two group roles (echoline_station: insert only; echoline_reader: read only), and the check
// every station and reader makes that the database has the version it speaks.
// Functions take an open libpqxx connection; not thread-safe (one connection per thread).
#pragma once

#include <string>
#include <vector>

#include <pqxx/pqxx>

namespace echoline::central {

inline constexpr int kCentralSchemaVersion = 1;

struct CentralMigration {
  int version;
  const char* what;
  const char* sql;
};
const std::vector<CentralMigration>& central_migrations();

// Applies every migration the database lacks, each in its own transaction, recording it in
// echoline.migrations. Needs an owner of the database with CREATEROLE (an administrator).
// Returns the versions applied. Throws pqxx exceptions; std::runtime_error for a database newer
// than this program.
std::vector<int> migrate(pqxx::connection& conn);

// The version the database has (0 when it has no Echoline schema). Throws pqxx exceptions.
int schema_version(pqxx::connection& conn);

}  // namespace echoline::central
