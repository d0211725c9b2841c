// A real PostgreSQL server for tests (postgres_server.hpp).
#include "tests/support/postgres_server.hpp"

#include <netinet/in.h>
#include <pwd.h>
#include <sys/socket.h>
#include <unistd.h>

#include <cstdlib>
#include <cstring>
#include <fstream>
#include <sstream>
#include <stdexcept>

#include "tests/support/process.hpp"

namespace echoline::testing {
namespace {

const std::filesystem::path kBin = "/usr/lib/postgresql/15/bin";
constexpr const char* kServerUser = "nobody";   // the unprivileged user the server runs as under root
constexpr const char* kAdmin = "echoline_admin";

int free_port() {
  int fd = ::socket(AF_INET, SOCK_STREAM, 0);
  sockaddr_in a{};
  a.sin_family = AF_INET;
  a.sin_addr.s_addr = htonl(INADDR_LOOPBACK);
  socklen_t len = sizeof a;
  if (fd < 0 || ::bind(fd, reinterpret_cast<sockaddr*>(&a), sizeof a) != 0 ||
      ::getsockname(fd, reinterpret_cast<sockaddr*>(&a), &len) != 0) {
    if (fd >= 0) ::close(fd);
    throw std::runtime_error("PostgresServer: no free loopback port");
  }
  const int port = ntohs(a.sin_port);
  ::close(fd);
  return port;
}

}  // namespace

std::optional<std::string> PostgresServer::unavailable() {
  for (const char* b : {"initdb", "pg_ctl", "postgres"}) {
    if (!std::filesystem::exists(kBin / b)) return "PostgreSQL 15 server binaries not installed (scripts/deps installs postgresql)";
  }
  if (::geteuid() == 0 && !getpwnam(kServerUser)) return "running as root and there is no user 'nobody' to run the server as";
  return std::nullopt;
}

std::string PostgresServer::run(const std::vector<std::string>& argv, bool as_server_user) const {
  std::vector<std::string> full;
  if (as_server_user && ::geteuid() == 0) full = {"/usr/sbin/runuser", "-u", kServerUser, "--"};
  full.insert(full.end(), argv.begin(), argv.end());
  ChildProcess::Options o;
  o.merge_stderr = true;
  o.cwd = dir_;
  o.env["LC_ALL"] = "C.UTF-8";
  auto p = ChildProcess::start(full, o);
  std::string out;
  while (auto line = p.read_line(120s)) out += *line + "\n";
  const auto code = p.wait(30s);
  if (!code || *code != 0) {
    std::string cmd;
    for (const auto& a : full) cmd += a + " ";
    throw std::runtime_error("PostgresServer: `" + cmd + "` failed (" + (code ? std::to_string(*code) : "hung") + "):\n" +
                             out);
  }
  return out;
}

PostgresServer::PostgresServer() {
  if (auto why = unavailable()) throw std::runtime_error(*why);
  std::string templ = "/tmp/echoline-pg-XXXXXX";
  if (!mkdtemp(templ.data())) throw std::runtime_error("mkdtemp: " + std::string(strerror(errno)));
  dir_ = templ;
  if (::geteuid() == 0) {
    const passwd* pw = getpwnam(kServerUser);
    if (::chown(dir_.c_str(), pw->pw_uid, pw->pw_gid) != 0) {
      throw std::runtime_error("PostgresServer: chown " + dir_.string() + ": " + strerror(errno));
    }
  }
  port_ = free_port();
  run({(kBin / "initdb").string(), "-D", (dir_ / "data").string(), "-U", kAdmin, "-E", "UTF8", "--no-sync",
       "--auth-local=trust", "--auth-host=scram-sha-256"},
      true);
  {
    std::ofstream conf(dir_ / "data" / "postgresql.conf", std::ios::app);
    conf << "listen_addresses = '127.0.0.1'\nport = " << port_ << "\nunix_socket_directories = '" << dir_.string()
         << "'\nmax_connections = 40\nshared_buffers = 16MB\n";
  }
  start();
  run({(kBin / "psql").string(), "-h", dir_.string(), "-p", std::to_string(port_), "-U", kAdmin, "-d", "postgres",
       "-v", "ON_ERROR_STOP=1", "-q", "-c", "CREATE DATABASE echoline"},
      false);
}

PostgresServer::~PostgresServer() {
  try {
    if (running_) stop();
  } catch (...) {
  }
  std::error_code ec;
  std::filesystem::remove_all(dir_, ec);
}

void PostgresServer::start() {
  run({(kBin / "pg_ctl").string(), "-D", (dir_ / "data").string(), "-l", (dir_ / "server.log").string(), "-w", "-t",
       "60", "start"},
      true);
  running_ = true;
}

void PostgresServer::stop() {
  run({(kBin / "pg_ctl").string(), "-D", (dir_ / "data").string(), "-m", "fast", "-w", "-t", "60", "stop"}, true);
  running_ = false;
}

std::string PostgresServer::admin_conninfo() const {
  return "host=" + dir_.string() + " port=" + std::to_string(port_) + " user=" + kAdmin + " dbname=echoline";
}

std::string PostgresServer::tcp_conninfo(const std::string& user, const std::string& password) const {
  return "host=127.0.0.1 port=" + std::to_string(port_) + " user=" + user + " password=" + password +
         " dbname=echoline connect_timeout=15";   // generous: a loaded 2-core CI machine, a local server
}

std::string PostgresServer::psql(const std::string& sql) const {
  return run({(kBin / "psql").string(), "-h", dir_.string(), "-p", std::to_string(port_), "-U", kAdmin, "-d", "echoline",
              "-v", "ON_ERROR_STOP=1", "-q", "-At", "-c", sql},
             false);
}

std::string PostgresServer::log_text() const {
  std::ifstream in(dir_ / "server.log");
  std::stringstream s;
  s << in.rdbuf();
  return s.str();
}

}  // namespace echoline::testing
