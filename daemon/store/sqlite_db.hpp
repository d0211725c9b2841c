// Thin RAII wrappers over the sqlite3 C API for the run store: a connection and prepared
// statements with bound parameters. Internal to daemon/store. Not thread-safe (RunStore locks).
#pragma once

#include <sqlite3.h>

#include <filesystem>
#include <optional>
#include <string>
#include <string_view>

#include "drivers/result.hpp"

namespace echoline::store::detail {

// A prepared statement. Parameters are 1-based, as in SQLite.
class Statement {
 public:
  Statement() = default;
  Statement(sqlite3* db, sqlite3_stmt* stmt) : db_(db), stmt_(stmt) {}
  ~Statement() { sqlite3_finalize(stmt_); }
  Statement(Statement&& o) noexcept : db_(o.db_), stmt_(o.stmt_) { o.stmt_ = nullptr; }
  Statement& operator=(Statement&& o) noexcept;
  Statement(const Statement&) = delete;
  Statement& operator=(const Statement&) = delete;

  Statement& bind(int i, std::string_view v);
  Statement& bind(int i, double v);          // NaN is stored as NULL by SQLite
  Statement& bind(int i, long long v);
  Statement& bind(int i, int v) { return bind(i, static_cast<long long>(v)); }
  Statement& bind(int i, std::optional<double> v);
  Statement& bind_null(int i);

  // Steps once: true when a row is available, false when done. Errors as storage errors.
  Result<bool> step();
  Status run();   // step until done, ignoring rows
  void reset();   // reset and clear bindings, for reuse

  std::string text(int col) const;
  double real(int col) const;                       // NULL -> NaN
  std::optional<double> optional_real(int col) const;
  long long integer(int col) const;
  bool is_null(int col) const { return sqlite3_column_type(stmt_, col) == SQLITE_NULL; }

 private:
  sqlite3* db_ = nullptr;
  sqlite3_stmt* stmt_ = nullptr;
};

// One connection. Messages name the file.
class Database {
 public:
  // read_only: SQLITE_OPEN_READONLY, the file must exist and is never created or changed.
  static Result<Database> open(const std::filesystem::path& file, bool read_only = false);
  Database() = default;
  ~Database() { sqlite3_close_v2(db_); }
  Database(Database&& o) noexcept : db_(o.db_), file_(std::move(o.file_)) { o.db_ = nullptr; }
  Database& operator=(Database&& o) noexcept;
  Database(const Database&) = delete;
  Database& operator=(const Database&) = delete;

  Result<Statement> prepare(std::string_view sql);
  Status exec(std::string_view sql);                 // one or more statements, no parameters
  Result<long long> query_int(std::string_view sql); // first column of the first row
  Result<std::string> query_text(std::string_view sql);
  Error error(std::string_view doing) const;         // storage error with SQLite's message
  sqlite3* handle() const { return db_; }
  const std::filesystem::path& file() const { return file_; }

 private:
  sqlite3* db_ = nullptr;
  std::filesystem::path file_;
};

}  // namespace echoline::store::detail
