// Test support: a real PostgreSQL server for the central-database tests, made with initdb and
// run with pg_ctl in a fresh folder under /tmp. initdb and pg_ctl refuse to run as root, so as
// root (CI) they run as the unprivileged user "nobody" (runuser) in a folder that user owns.
// Local (Unix socket) connections are trusted for the administrator; TCP needs a password
// (scram-sha-256). Not thread-safe: one test thread drives it (stop/start from that thread).
#pragma once

#include <filesystem>
#include <optional>
#include <string>
#include <vector>

namespace echoline::testing {

class PostgresServer {
 public:
  // Why a server cannot be made here (no server binaries, no unprivileged user), or nullopt.
  static std::optional<std::string> unavailable();

  // initdb + start. Throws std::runtime_error naming the step and its output.
  PostgresServer();
  ~PostgresServer();   // stops the server and removes its folder
  PostgresServer(const PostgresServer&) = delete;
  PostgresServer& operator=(const PostgresServer&) = delete;

  void start();        // pg_ctl start -w
  void stop();         // pg_ctl stop -m fast -w
  bool running() const { return running_; }

  int port() const { return port_; }
  std::string socket_dir() const { return dir_.string(); }
  // The administrator (superuser made by initdb) over the Unix socket, database "echoline".
  std::string admin_conninfo() const;
  // A login role over TCP on 127.0.0.1.
  std::string tcp_conninfo(const std::string& user, const std::string& password) const;
  // Runs SQL through psql as the administrator; returns its output. Throws on failure.
  std::string psql(const std::string& sql) const;
  // The server's log (for messages in a failing test).
  std::string log_text() const;

 private:
  std::string run(const std::vector<std::string>& argv, bool as_server_user) const;
  std::filesystem::path dir_;
  int port_ = 0;
  bool running_ = false;
};

}  // namespace echoline::testing
