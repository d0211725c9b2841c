// Central database settings: the settings file (permissions checked), connection strings, and
// scrubbing passwords out of every message.
#include "daemon/central/settings.hpp"

#include <sys/stat.h>
#include <unistd.h>

#include <libpq-fe.h>

#include <memory>
#include <regex>

#include <fmt/format.h>

#include "drivers/jsonc.hpp"

namespace echoline::central {
namespace {

// libpq's quoting for key=value connection strings: single quotes, backslash-escaped.
std::string quote(std::string_view v) {
  std::string out = "'";
  for (char c : v) {
    if (c == '\'' || c == '\\') out += '\\';
    out += c;
  }
  return out + "'";
}

std::string describe(const std::string& user, const std::string& host, const std::string& port,
                     const std::string& dbname, const std::string& sslmode) {
  return fmt::format("{}@{}:{}/{} (sslmode={})", user.empty() ? "(default user)" : user,
                     host.empty() ? "(default host)" : host, port.empty() ? "5432" : port,
                     dbname.empty() ? "(default database)" : dbname, sslmode.empty() ? "prefer" : sslmode);
}

}  // namespace

std::string scrub(std::string text, std::string_view secret) {
  if (!secret.empty()) {
    for (std::size_t at = text.find(secret); at != std::string::npos; at = text.find(secret, at + 8)) {
      text.replace(at, secret.size(), "********");
    }
  }
  static const std::regex kv(R"((password\s*=\s*)('(?:[^'\\]|\\.)*'|\S+))", std::regex::icase);
  static const std::regex uri(R"((://[^:/@\s]*:)[^@\s]*@)");
  text = std::regex_replace(text, kv, "$1********");
  text = std::regex_replace(text, uri, "$1********@");
  return text;
}

bool looks_like_connection_string(std::string_view text) {
  return text.starts_with("postgresql://") || text.starts_with("postgres://") || text.find('=') != std::string_view::npos;
}

Result<CentralSettings> load_settings(const std::filesystem::path& file) {
  struct stat st {};
  if (::stat(file.c_str(), &st) != 0) {
    return make_error(ErrorKind::config, fmt::format("central settings {}: cannot read it: {}", file.string(),
                                                     std::strerror(errno)));
  }
  if ((st.st_mode & 0077) != 0) {
    return make_error(ErrorKind::config,
                      fmt::format("central settings {}: mode {:04o} lets its group or others read or write it; it "
                                  "may hold the database password: chmod 600 {}",
                                  file.string(), st.st_mode & 07777, file.string()));
  }
  if (st.st_uid != ::geteuid()) {
    return make_error(ErrorKind::config,
                      fmt::format("central settings {}: owned by uid {}, not by the user reading it (uid {}): chown it "
                                  "to the daemon's user",
                                  file.string(), st.st_uid, ::geteuid()));
  }
  try {
    const auto doc = drivers::JsoncDocument::load(file);
    using drivers::JsonPointer;
    const JsonPointer root;
    doc.check_keys(root, {"host", "port", "dbname", "user", "password", "sslmode", "sslrootcert", "sslcert", "sslkey",
                          "sslcrl", "connect_timeout_s", "application_name", "batch_runs", "retry_min_s",
                          "retry_max_s"});
    CentralSettings s;
    std::string info;
    auto add = [&](const char* key, const std::string& value) {
      if (!value.empty()) info += fmt::format("{}{}={}", info.empty() ? "" : " ", key, quote(value));
    };
    const std::string host = doc.string_or(root / "host", "");
    const std::string port = doc.has(root / "port") ? std::to_string(doc.require_integer(root / "port")) : "";
    const std::string dbname = doc.string_or(root / "dbname", "");
    const std::string user = doc.string_or(root / "user", "");
    const std::string sslmode = doc.string_or(root / "sslmode", "");
    if (!sslmode.empty() && sslmode != "disable" && sslmode != "allow" && sslmode != "prefer" && sslmode != "require" &&
        sslmode != "verify-ca" && sslmode != "verify-full") {
      doc.fail(root / "sslmode", "must be disable, allow, prefer, require, verify-ca or verify-full");
    }
    s.password = doc.string_or(root / "password", "");
    add("host", host);
    add("port", port);
    add("dbname", dbname);
    add("user", user);
    add("password", s.password);
    add("sslmode", sslmode);
    for (const char* key : {"sslrootcert", "sslcert", "sslkey", "sslcrl"}) {
      if (!doc.has(root / key)) continue;
      std::filesystem::path p = doc.require_string(root / key);
      if (p.is_relative()) p = file.parent_path() / p;
      add(key, p.string());
    }
    add("connect_timeout", std::to_string(doc.integer_or(root / "connect_timeout_s", 5)));
    add("application_name", doc.string_or(root / "application_name", "echoline"));
    s.conninfo = info;
    s.description = describe(user, host, port, dbname, sslmode);
    s.batch_runs = static_cast<int>(doc.integer_or(root / "batch_runs", s.batch_runs));
    if (s.batch_runs < 1 || s.batch_runs > 1000) doc.fail(root / "batch_runs", "must lie within 1 to 1000");
    s.retry_min_s = doc.number_in(root / "retry_min_s", s.retry_min_s, 0.01, 60, "s");
    s.retry_max_s = doc.number_in(root / "retry_max_s", s.retry_max_s, s.retry_min_s, 3600, "s");
    return s;
  } catch (const drivers::ConfigError& e) {
    return make_error(ErrorKind::config, scrub(e.what(), ""));
  }
}

Result<CentralSettings> settings_from_connection_string(std::string_view text) {
  char* err = nullptr;
  const std::string owned(text);
  std::unique_ptr<PQconninfoOption, void (*)(PQconninfoOption*)> opts(PQconninfoParse(owned.c_str(), &err),
                                                                      PQconninfoFree);
  if (!opts) {
    std::string why = err ? err : "not a connection string";
    if (err) PQfreemem(err);
    while (!why.empty() && (why.back() == '\n' || why.back() == ' ')) why.pop_back();
    return make_error(ErrorKind::invalid_argument,
                      fmt::format("central database: connection string not understood: {}", scrub(why, "")));
  }
  CentralSettings s;
  std::string host, port, dbname, user, sslmode;
  for (auto* o = opts.get(); o->keyword; ++o) {
    if (!o->val) continue;
    const std::string_view k = o->keyword;
    if (k == "password") s.password = o->val;
    if (k == "host") host = o->val;
    if (k == "port") port = o->val;
    if (k == "dbname") dbname = o->val;
    if (k == "user") user = o->val;
    if (k == "sslmode") sslmode = o->val;
  }
  s.conninfo = owned;
  s.description = describe(user, host, port, dbname, sslmode);
  return s;
}

}  // namespace echoline::central
