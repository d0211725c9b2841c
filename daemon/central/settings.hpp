// Connection settings of the central PostgreSQL database: read from a settings file whose
// permissions are checked (it may hold the password), or from a connection string given on a
// command line. Builds libpq conninfo text and a password-free description. Pure but for file I/O.
#pragma once

#include <filesystem>
#include <string>
#include <string_view>

#include "drivers/result.hpp"

namespace echoline::central {

struct CentralSettings {
  std::string conninfo;      // libpq connection string (key=value form), password included
  std::string password;      // kept apart so every message can be scrubbed of it ("" = none)
  std::string description;   // "user@host:port/dbname (sslmode=...)": safe for logs and errors
  // Forwarder tuning (settings file only).
  int batch_runs = 50;             // runs per central transaction
  double retry_min_s = 0.5;        // first wait after a failure; doubles up to retry_max_s
  double retry_max_s = 30;
};

// Reads a settings file (JSON with comments). Keys: host, port, dbname, user, password,
// sslmode, sslrootcert, sslcert, sslkey, sslcrl, connect_timeout_s, application_name,
// batch_runs, retry_min_s, retry_max_s. Refuses (ErrorKind::config, naming the file) a file that
// its group or others may read or write, a file not owned by the user reading it, and unknown
// keys. Never puts the password into a message.
Result<CentralSettings> load_settings(const std::filesystem::path& file);

// A connection string from a command line: a URI ("postgresql://...", "postgres://...") or
// key=value text. ErrorKind::invalid_argument when libpq cannot parse it (message scrubbed).
Result<CentralSettings> settings_from_connection_string(std::string_view text);

// True for text that looks like a PostgreSQL connection string rather than a file path.
bool looks_like_connection_string(std::string_view text);

// `text` with every occurrence of `secret` (when non-empty) replaced by "********", and any
// "password=..." / "://user:...@" value masked as well.
std::string scrub(std::string text, std::string_view secret);

}  // namespace echoline::central
