// Exit codes as documented (README, `echoline --help`): numeric options out of range are usage
// errors (2) in every binary, and `echoline status` says 4 when an instrument is NOT READY.
#include <sys/socket.h>
#include <sys/un.h>
#include <unistd.h>

#include <regex>

#include <gtest/gtest.h>

#include <cstring>
#include <fstream>
#include <regex>
#include <string>
#include <vector>

#include "tests/core/e2e_station.hpp"

namespace echoline::e2e {
namespace {

using testing::Outcome;

Outcome run(const std::filesystem::path& binary, std::vector<std::string> args) {
  args.insert(args.begin(), binary.string());
  return testing::run_to_end(std::move(args));
}

bool says(const Outcome& o, const std::string& text) { return o.output.find(text) != std::string::npos; }

TEST(ExitCodes, DaemonTcpPortOutsideZeroTo65535IsAUsageError) {
  for (const char* port : {"-1", "65536", "70000", "12abc", "", "1e3"}) {
    const Outcome o = run(testing::daemon_binary(), {"--config", "/nonexistent/station.jsonc", "--tcp-port", port});
    EXPECT_EQ(o.code, 2) << port << ": " << o.output;
    EXPECT_TRUE(says(o, "--tcp-port")) << o.output;
    EXPECT_TRUE(says(o, "from 0 to 65535")) << o.output;
  }
  // The ends of the range and "auto" (any free port) pass the option check; this run then fails
  // on the missing config.
  for (const char* port : {"0", "65535", "auto"}) {
    const Outcome o = run(testing::daemon_binary(), {"--config", "/nonexistent/station.jsonc", "--tcp-port", port});
    EXPECT_FALSE(says(o, "--tcp-port")) << o.output;
    EXPECT_TRUE(says(o, "/nonexistent/station.jsonc")) << o.output;
  }
}

// A token file the config names but that is missing or too short is a configuration error (2)
// at its key, saying how to make one; null, like no key, means no token.
TEST(ExitCodes, DaemonTokenFileMissingIsAConfigErrorAtItsKey) {
  testing::TempDir dir("echoline-token");
  Sim sim("tiny-lot.jsonc");
  const auto missing = dir / "api-token";
  const auto config = write_station_config(dir.path(), sim, "whip915.jsonc",
                                           json({{"token_file", missing.string()}}).dump());
  Outcome o = run(testing::daemon_binary(), {"--config", config.string(), "--no-log-file"});
  EXPECT_EQ(o.code, 2) << o.output;
  EXPECT_TRUE(says(o, config.string() + ":")) << o.output;
  EXPECT_TRUE(says(o, "/api/token_file")) << o.output;
  EXPECT_TRUE(says(o, "no such file")) << o.output;
  EXPECT_TRUE(says(o, "umask 077")) << o.output;
  std::ofstream(missing) << "short\n";
  o = run(testing::daemon_binary(), {"--config", config.string(), "--no-log-file"});
  EXPECT_EQ(o.code, 2) << o.output;
  EXPECT_TRUE(says(o, "shorter than 16 characters")) << o.output;
  const auto without = write_station_config(dir.path(), sim, "whip915.jsonc", R"({"token_file": null})");
  Daemon d(without);   // starts: no token, local socket only
  EXPECT_FALSE(d.unix_path().empty());
}

// A listener off loopback without a token is refused as a configuration error (2) at its key
// also when the port comes from the command line (README, "Exit codes"), before any instrument
// is connected: the simulator sees no connection.
TEST(ExitCodes, DaemonPortFromTheCommandLineOffLoopbackWithoutATokenIsAConfigError) {
  testing::TempDir dir("echoline-offloop");
  Sim sim("tiny-lot.jsonc");
  const auto config = write_station_config(dir.path(), sim, "whip915.jsonc", R"({"tcp_host": "0.0.0.0"})");
  const Outcome o = run(testing::daemon_binary(), {"--config", config.string(), "--tcp-port", "auto", "--no-log-file"});
  EXPECT_EQ(o.code, 2) << o.output;
  EXPECT_TRUE(says(o, config.string() + ": /api/tcp_host: --tcp-port")) << o.output;
  EXPECT_TRUE(says(o, "needs api.token_file")) << o.output;
  EXPECT_FALSE(says(o, "starting")) << "it started before refusing: " << o.output;
}

// A station config naming a recipe file that does not exist is a configuration error (2) at the
// config's own key and line, with the file named (README: "the message names file, line and key").
TEST(ExitCodes, DaemonRecipeFileMissingIsAConfigErrorAtTheConfigsKey) {
  testing::TempDir dir("echoline-norecipe");
  Sim sim("tiny-lot.jsonc");
  const auto missing = dir / "nope.jsonc";
  const auto config = write_station_config(dir.path(), sim, missing.string());
  const Outcome o = run(testing::daemon_binary(), {"--config", config.string(), "--no-log-file"});
  EXPECT_EQ(o.code, 2) << o.output;
  // "<config>:<line>: /recipe: <file>: cannot open ...": the line is where write_station_config put the key.
  EXPECT_TRUE(says(o, config.string() + ":")) << o.output;
  EXPECT_TRUE(std::regex_search(o.output, std::regex(R"(station\.jsonc:[0-9]+: /recipe: )"))) << o.output;
  EXPECT_TRUE(says(o, missing.string() + ": cannot open the recipe file")) << o.output;
}

TEST(ExitCodes, DaemonBadOverrideIsAConfigurationErrorNamingTheOption) {
  const auto config = (testing::source_dir() / "config" / "station.jsonc").string();
  const Outcome port = run(testing::daemon_binary(), {"--config", config, "--no-log-file", "--override",
                                                      "receiver=tcp://127.0.0.1"});
  EXPECT_EQ(port.code, 2) << port.output;
  EXPECT_TRUE(says(port, "--override receiver=tcp://127.0.0.1:")) << port.output;
  EXPECT_TRUE(says(port, "missing :port")) << port.output;
  EXPECT_FALSE(says(port, "station.jsonc: instrument")) << port.output;

  const Outcome role = run(testing::daemon_binary(), {"--config", config, "--no-log-file", "--override",
                                                      "reciever=tcp://127.0.0.1:5026"});
  EXPECT_EQ(role.code, 2) << role.output;
  EXPECT_TRUE(says(role, "--override reciever=tcp://127.0.0.1:5026:")) << role.output;
  EXPECT_TRUE(says(role, "source, receiver and switch")) << role.output;
}

TEST(ExitCodes, ClientNumbersOutOfRangeAreUsageErrors) {
  const auto client = testing::client_binary();
  const std::vector<std::pair<std::vector<std::string>, std::string>> cases = {
      {{"station", "--reconnect-timeout", "-1", "--socket", "/nonexistent.sock"}, "--reconnect-timeout"},
      {{"station", "--reconnect-timeout", "604801", "--socket", "/nonexistent.sock"}, "--reconnect-timeout"},
      {{"station", "--sim-fixture", "tcp://127.0.0.1:70000", "--socket", "/nonexistent.sock"}, "--sim-fixture"},
      {{"status", "--tcp", "127.0.0.1:70000"}, "--tcp"},
      {{"status", "--tcp", "127.0.0.1:0"}, "--tcp"},
      {{"status", "--tcp", "127.0.0.1:-5"}, "--tcp"},
  };
  for (const auto& [args, option] : cases) {
    const Outcome o = run(client, args);
    EXPECT_EQ(o.code, 2) << args[1] << " " << args[2] << ": " << o.output;
    EXPECT_TRUE(says(o, option)) << o.output;
  }
}

TEST(ExitCodes, StatusExitsZeroWhenReadyAndFourWhenAnInstrumentIsNotReady) {
  testing::TempDir dir("echoline-exit-codes");
  Sim sim("tiny-lot.jsonc");
  const auto ready_config = write_station_config(dir.path(), sim);
  {
    Daemon daemon(ready_config);
    const Outcome o = run(testing::client_binary(), {"status", "--socket", daemon.unix_path()});
    EXPECT_EQ(o.code, 0) << o.output;
    EXPECT_FALSE(says(o, "NOT READY")) << o.output;
  }
  // The receiver moved to a port nobody listens on (port 1 on loopback: refused at once).
  json cfg = json::parse(std::ifstream(ready_config));
  cfg["instruments"][1]["address"] = "tcp://127.0.0.1:1";
  std::ofstream(ready_config) << cfg.dump(2) << "\n";
  Daemon daemon(ready_config);
  const Outcome o = run(testing::client_binary(), {"status", "--socket", daemon.unix_path()});
  EXPECT_EQ(o.code, 4) << o.output;
  EXPECT_TRUE(says(o, "NOT READY")) << o.output;
  EXPECT_TRUE(says(o, "analyzer")) << o.output;
}

// An analyzer that answered with the wrong identity at start is NOT READY; once it answers right
// (switched back, or the right one cabled in), `status` on an idle station tries it again and
// shows it ready, without a test having to start first.
TEST(ExitCodes, StatusTriesAnInstrumentThatWasNotReadyAgainWhileIdle) {
  testing::TempDir dir("echoline-exit-codes");
  Sim sim("tiny-lot.jsonc");
  json armed = sim.control({{"cmd", "fault"}, {"role", "receiver"}, {"kind", "wrong-identity"}, {"probability", 1}, {"seed", 1}});
  ASSERT_TRUE(armed.value("ok", false)) << armed.dump();
  Daemon daemon(write_station_config(dir.path(), sim));
  Outcome o = run(testing::client_binary(), {"status", "--socket", daemon.unix_path()});
  EXPECT_EQ(o.code, 4) << o.output;   // tried again, still the wrong identity
  EXPECT_TRUE(says(o, "NOT READY")) << o.output;
  json cleared = sim.control({{"cmd", "clear-faults"}});
  ASSERT_TRUE(cleared.value("ok", false)) << cleared.dump();
  o = run(testing::client_binary(), {"status", "--socket", daemon.unix_path()});
  EXPECT_EQ(o.code, 0) << o.output;
  EXPECT_FALSE(says(o, "NOT READY")) << o.output;
}

// The console's opening banner does the same: an instrument that has come back since it was
// last seen NOT READY is tried again before the banner shows it, not shown stale.
TEST(ExitCodes, TheConsoleBannerTriesAnInstrumentThatWasNotReadyAgain) {
  testing::TempDir dir("echoline-exit-codes");
  Sim sim("tiny-lot.jsonc");
  json armed = sim.control({{"cmd", "fault"}, {"role", "receiver"}, {"kind", "wrong-identity"}, {"probability", 1}, {"seed", 1}});
  ASSERT_TRUE(armed.value("ok", false)) << armed.dump();
  Daemon daemon(write_station_config(dir.path(), sim));
  json cleared = sim.control({{"cmd", "clear-faults"}});
  ASSERT_TRUE(cleared.value("ok", false)) << cleared.dump();
  const Outcome o = run(testing::client_binary(), {"station", "--socket", daemon.unix_path()});   // stdin at its end: banner, then out
  EXPECT_TRUE(says(o, "ECHOLINE STATION")) << o.output;
  EXPECT_FALSE(says(o, "NOT READY")) << o.output;
}

TEST(ExitCodes, ASocketThisLoginMayNotUseSaysWhichGroupToJoin) {
  if (::geteuid() != 0) GTEST_SKIP() << "needs root to run the client as another user";
  testing::TempDir dir("echoline-exit-codes");   // mode 0700, like /run/echoline to a non-member
  const auto socket_path = dir / "echolined.sock";
  const int fd = ::socket(AF_UNIX, SOCK_STREAM, 0);
  sockaddr_un addr{};
  addr.sun_family = AF_UNIX;
  std::strncpy(addr.sun_path, socket_path.c_str(), sizeof(addr.sun_path) - 1);
  ASSERT_EQ(::bind(fd, reinterpret_cast<sockaddr*>(&addr), sizeof(addr)), 0);
  ASSERT_EQ(::listen(fd, 1), 0);
  // Debian's "nobody" (uid and gid 65534, base-passwd, from memory).
  const Outcome o = run("/usr/bin/setpriv", {"--reuid=65534", "--regid=65534", "--clear-groups",
                                             testing::client_binary().string(), "status", "--socket", socket_path.string()});
  ::close(fd);
  EXPECT_EQ(o.code, 3) << o.output;
  EXPECT_TRUE(says(o, "usermod -aG echoline")) << o.output;
  EXPECT_FALSE(says(o, "Is echolined running?")) << o.output;
}

}  // namespace
}  // namespace echoline::e2e
