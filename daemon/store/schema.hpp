// The run store's schema as ordered migrations (version N's SQL turns a version N-1 file into N),
// and the open-time pragmas. Internal to daemon/store. Not thread-safe (RunStore locks).
#pragma once

#include <string_view>
#include <vector>

#include "daemon/store/sqlite_db.hpp"

namespace echoline::store::detail {

struct Migration {
  int version;               // user_version after this step
  std::string_view what;     // one line for logs and errors
  std::string_view sql;      // run inside the migration transaction
};

// Ordered from version 1. The last one's version equals kSchemaVersion.
const std::vector<Migration>& migrations();

// Sets the pragmas (WAL, synchronous=FULL, foreign keys, busy timeout) and brings the file to
// kSchemaVersion in one transaction. Refuses a newer file or a SQLite file that is not a run store.
Status prepare_schema(Database& db, int busy_timeout_ms);

// For a read-only connection: sets the busy timeout and checks, without changing anything, that
// the file is a run store of exactly kSchemaVersion. A newer or older version is refused with
// both numbers and what to do; nothing is ever migrated.
Status check_schema_read_only(Database& db, int busy_timeout_ms);

}  // namespace echoline::store::detail
