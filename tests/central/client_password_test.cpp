// The client keeps database passwords off its command line: `echoline runs|report|export|central
// migrate --db` refuse a connection string that holds one (before connecting, without showing
// it), and a password in libpq's password file (PGPASSFILE) reaches a real PostgreSQL server.
#include <sys/stat.h>

#include <fstream>
#include <map>
#include <string>
#include <vector>

#include <gtest/gtest.h>
#include <pqxx/pqxx>

#include "daemon/central/schema.hpp"
#include "tests/support/postgres_server.hpp"
#include "tests/support/process.hpp"

namespace echoline::central {
namespace {

using testing::PostgresServer;
using testing::TempDir;

using testing::Outcome;

Outcome run_client(std::vector<std::string> args, std::map<std::string, std::string> env = {}) {
  args.insert(args.begin(), testing::client_binary().string());
  return testing::run_to_end(std::move(args), std::move(env));
}

bool says(const Outcome& o, const std::string& text) { return o.output.find(text) != std::string::npos; }

// Port 1 on loopback: nothing listens, so a client that tried to connect would fail with exit 5.
TEST(CentralClientPassword, ConnectionStringWithPasswordIsRefusedBeforeConnectingAndNotShown) {
  const std::string pw = "Cmdline-Pw-77";
  const std::vector<std::string> strings = {"postgresql://quality:" + pw + "@127.0.0.1:1/echoline",
                                            "host=127.0.0.1 port=1 dbname=echoline user=quality password=" + pw,
                                            "postgres://127.0.0.1:1/echoline?user=quality&password=" + pw};
  const std::vector<std::vector<std::string>> commands = {
      {"runs", "--lot", "LOT-7"},
      {"report", "--lot", "LOT-7", "--out", "-"},
      {"export", "--scope", "lot", "--key", "LOT-7", "--format", "csv", "--out", "-"},
      {"central", "migrate"}};
  for (const auto& conninfo : strings) {
    for (auto args : commands) {
      args.insert(args.end(), {"--db", conninfo});
      const Outcome o = run_client(args);
      EXPECT_EQ(o.code, 2) << args.front() << " " << conninfo << ": " << o.output;   // usage error, not 5
      EXPECT_TRUE(says(o, "holds a password")) << o.output;
      EXPECT_TRUE(says(o, "PGPASSFILE")) << o.output;
      EXPECT_TRUE(says(o, "~/.pgpass")) << o.output;
      EXPECT_TRUE(says(o, "mode 0600")) << o.output;
      EXPECT_FALSE(says(o, pw)) << o.output;
    }
  }
}

TEST(CentralClientPassword, HelpSaysWhereThePasswordGoes) {
  for (const char* command : {"runs", "report", "export", "central"}) {
    const Outcome o = run_client({command, "--help"});
    EXPECT_EQ(o.code, 0) << command;
    EXPECT_TRUE(says(o, "PGPASSFILE")) << command << ": " << o.output;
  }
}

class CentralClientPasswordDb : public ::testing::Test {
 protected:
  static void SetUpTestSuite() {
    if (PostgresServer::unavailable()) return;
    server_ = new PostgresServer();
    pqxx::connection admin(server_->admin_conninfo());
    migrate(admin);
    server_->psql("CREATE ROLE quality LOGIN PASSWORD 'Pgpass-Pw-43' IN ROLE echoline_reader;");
  }
  static void TearDownTestSuite() {
    delete server_;
    server_ = nullptr;
  }
  void SetUp() override {
    if (!server_) GTEST_SKIP() << *PostgresServer::unavailable();
  }
  static inline PostgresServer* server_ = nullptr;
};

// libpq's password file: lines host:port:database:user:password, used only when the file's
// group and others have no access (PostgreSQL 15 documentation, libpq, "The Password File").
TEST_F(CentralClientPasswordDb, PasswordFileNamedByPgpassfileIsReadAndIgnoredWhenOthersMayReadIt) {
  TempDir dir;
  const auto pgpass = dir / "pgpass";
  std::ofstream(pgpass) << "127.0.0.1:" << server_->port() << ":echoline:quality:Pgpass-Pw-43\n";
  ::chmod(pgpass.c_str(), 0600);
  const std::string conninfo =
      "host=127.0.0.1 port=" + std::to_string(server_->port()) + " dbname=echoline user=quality connect_timeout=15";
  const std::map<std::string, std::string> env = {{"PGPASSFILE", pgpass.string()}, {"HOME", dir.path().string()}};

  // Connected and read: the lot has no runs, which `runs` reports with exit 1.
  Outcome o = run_client({"runs", "--lot", "LOT-NONE", "--db", conninfo}, env);
  EXPECT_EQ(o.code, 1) << o.output;
  EXPECT_TRUE(says(o, "no runs stored for lot LOT-NONE")) << o.output;

  // The same file readable by others: libpq ignores it, the server refuses the login (exit 5).
  ::chmod(pgpass.c_str(), 0644);
  o = run_client({"runs", "--lot", "LOT-NONE", "--db", conninfo}, env);
  EXPECT_EQ(o.code, 5) << o.output;
  EXPECT_FALSE(says(o, "Pgpass-Pw-43")) << o.output;
}

}  // namespace
}  // namespace echoline::central
