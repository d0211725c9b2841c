// RAII wrappers over sqlite3: every failure becomes an ErrorKind::storage value naming the file.
#include "daemon/store/sqlite_db.hpp"

#include <fmt/format.h>

#include <cmath>
#include <limits>

namespace echoline::store::detail {

Statement& Statement::operator=(Statement&& o) noexcept {
  if (this != &o) {
    sqlite3_finalize(stmt_);
    db_ = o.db_;
    stmt_ = o.stmt_;
    o.stmt_ = nullptr;
  }
  return *this;
}

Statement& Statement::bind(int i, std::string_view v) {
  sqlite3_bind_text(stmt_, i, v.data(), static_cast<int>(v.size()), SQLITE_TRANSIENT);
  return *this;
}
Statement& Statement::bind(int i, double v) {
  sqlite3_bind_double(stmt_, i, v);
  return *this;
}
Statement& Statement::bind(int i, long long v) {
  sqlite3_bind_int64(stmt_, i, v);
  return *this;
}
Statement& Statement::bind(int i, std::optional<double> v) {
  if (v) return bind(i, *v);
  return bind_null(i);
}
Statement& Statement::bind_null(int i) {
  sqlite3_bind_null(stmt_, i);
  return *this;
}

Result<bool> Statement::step() {
  const int rc = sqlite3_step(stmt_);
  if (rc == SQLITE_ROW) return true;
  if (rc == SQLITE_DONE) return false;
  const char* sql = sqlite3_sql(stmt_);
  std::string head = sql ? std::string(sql).substr(0, 60) : std::string();
  Error e = make_error(ErrorKind::storage, fmt::format("{} (SQLite code {}) in \"{}…\"", sqlite3_errmsg(db_),
                                                      sqlite3_extended_errcode(db_), head));
  e.instrument_code = sqlite3_extended_errcode(db_);
  return e;
}

Status Statement::run() {
  for (;;) {
    auto r = step();
    if (!r.ok()) return r.error();
    if (!*r) return Status::success();
  }
}

void Statement::reset() {
  sqlite3_reset(stmt_);
  sqlite3_clear_bindings(stmt_);
}

std::string Statement::text(int col) const {
  const auto* p = sqlite3_column_text(stmt_, col);
  if (!p) return {};
  return std::string(reinterpret_cast<const char*>(p), static_cast<std::size_t>(sqlite3_column_bytes(stmt_, col)));
}
double Statement::real(int col) const {
  if (is_null(col)) return std::numeric_limits<double>::quiet_NaN();
  return sqlite3_column_double(stmt_, col);
}
std::optional<double> Statement::optional_real(int col) const {
  if (is_null(col)) return std::nullopt;
  return sqlite3_column_double(stmt_, col);
}
long long Statement::integer(int col) const { return sqlite3_column_int64(stmt_, col); }

Database& Database::operator=(Database&& o) noexcept {
  if (this != &o) {
    sqlite3_close_v2(db_);
    db_ = o.db_;
    file_ = std::move(o.file_);
    o.db_ = nullptr;
  }
  return *this;
}

Result<Database> Database::open(const std::filesystem::path& file, bool read_only) {
  Database d;
  d.file_ = file;
  const int mode = read_only ? SQLITE_OPEN_READONLY : SQLITE_OPEN_READWRITE | SQLITE_OPEN_CREATE;
  const int rc = sqlite3_open_v2(file.c_str(), &d.db_, mode | SQLITE_OPEN_NOMUTEX, nullptr);
  if (rc != SQLITE_OK) {
    return make_error(ErrorKind::storage, fmt::format("run store {}: cannot open: {}", file.string(),
                                                      d.db_ ? sqlite3_errmsg(d.db_) : sqlite3_errstr(rc)));
  }
  sqlite3_extended_result_codes(d.db_, 1);
  return d;
}

Error Database::error(std::string_view doing) const {
  Error e = make_error(ErrorKind::storage, fmt::format("run store {}: {}: {} (SQLite code {})", file_.string(), doing,
                                                      sqlite3_errmsg(db_), sqlite3_extended_errcode(db_)));
  e.instrument_code = sqlite3_extended_errcode(db_);
  return e;
}

Result<Statement> Database::prepare(std::string_view sql) {
  sqlite3_stmt* stmt = nullptr;
  if (sqlite3_prepare_v2(db_, sql.data(), static_cast<int>(sql.size()), &stmt, nullptr) != SQLITE_OK) {
    return error(fmt::format("preparing \"{}\"", sql.substr(0, 60)));
  }
  return Statement(db_, stmt);
}

Status Database::exec(std::string_view sql) {
  char* msg = nullptr;
  const std::string s(sql);
  if (sqlite3_exec(db_, s.c_str(), nullptr, nullptr, &msg) != SQLITE_OK) {
    sqlite3_free(msg);
    return error(fmt::format("running \"{}\"", sql.substr(0, 60)));
  }
  return Status::success();
}

Result<long long> Database::query_int(std::string_view sql) {
  auto st = prepare(sql);
  if (!st.ok()) return st.error();
  auto r = st->step();
  if (!r.ok()) return r.error().with_context(fmt::format("run store {}", file_.string()));
  if (!*r) return 0LL;
  return st->integer(0);
}

Result<std::string> Database::query_text(std::string_view sql) {
  auto st = prepare(sql);
  if (!st.ok()) return st.error();
  std::string out;
  for (;;) {
    auto r = st->step();
    if (!r.ok()) return r.error().with_context(fmt::format("run store {}", file_.string()));
    if (!*r) break;
    if (!out.empty()) out += "\n";
    out += st->text(0);
  }
  return out;
}

}  // namespace echoline::store::detail
