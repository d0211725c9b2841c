// echolined answers its clients while it connects the instruments: a generator that is slow to
// answer holds the start-up for seconds, and a client that asks meanwhile hears "busy:
// instrument connect" at once instead of waiting unanswered. "listening" still means ready.
// The `echoline` commands wait for that, and for a probe, instead of calling the station busy.
#include <filesystem>
#include <thread>

#include <gtest/gtest.h>

#include "tests/core/e2e_station.hpp"

namespace echoline::e2e {
namespace {

TEST(DaemonStartup, AClientIsAnsweredBusyWhileTheInstrumentsConnect) {
  testing::TempDir dir("echoline-startup");
  Sim sim("tiny-lot.jsonc");
  // Every reply of the generator 1.5 s late (inside its 2 s timeout): the connect's queries
  // (identity, status, errors) then take several seconds.
  json armed = sim.control({{"cmd", "fault"}, {"role", "source"}, {"kind", "slow-reply"}, {"probability", 1},
                            {"seed", 1}, {"delay_ms", 1500}});
  ASSERT_TRUE(armed.value("ok", false)) << armed.dump();
  const auto config = write_station_config(dir.path(), sim);
  const auto socket = dir.path() / "echolined.sock";
  auto daemon = testing::ChildProcess::start(
      {testing::daemon_binary().string(), "--config", config.string(), "--log-level", "warn", "--no-log-file"});

  // The socket is bound before any instrument is touched.
  const auto deadline = std::chrono::steady_clock::now() + 20s;
  while (!std::filesystem::exists(socket) && std::chrono::steady_clock::now() < deadline) {
    std::this_thread::sleep_for(20ms);
  }
  ASSERT_TRUE(std::filesystem::exists(socket)) << "echolined did not bind " << socket;
  Api api(LineSocket::unix_socket(socket.string()));
  // Answered during the connect, not after it: only then is the busy kind "instrument connect".
  json status = api.call("status");
  ASSERT_TRUE(status.value("ok", false)) << status.dump();
  const json& busy = status["result"]["busy"];
  EXPECT_TRUE(busy.is_object() && busy.value("kind", "") == "instrument connect") << status.dump();
  json refused = api.call("test.start", {{"serial", "TINY-01"}});
  EXPECT_FALSE(refused.value("ok", true)) << refused.dump();
  EXPECT_EQ(refused["error"].value("code", ""), "busy") << refused.dump();
  EXPECT_NE(refused["error"].value("message", "").find("instrument connect"), std::string::npos) << refused.dump();
  // Nothing to cancel: the connect ends within the instruments' timeouts, and cancel says so.
  json cancel = api.call("cancel");
  EXPECT_FALSE(cancel.value("ok", true)) << cancel.dump();
  EXPECT_NE(cancel["error"].value("message", "").find("cannot be cancelled"), std::string::npos) << cancel.dump();

  // The client waits for the connect to end, says so, then shows the station as it is once
  // ready (README "Exit codes": 0 shown, every instrument ready).
  const testing::Outcome shown =
      testing::run_to_end({testing::client_binary().string(), "status", "--socket", socket.string()}, {}, 60s);
  EXPECT_EQ(shown.code, 0) << shown.output;
  EXPECT_NE(shown.output.find("connecting the instruments"), std::string::npos) << shown.output;
  EXPECT_EQ(shown.output.find("busy: {"), std::string::npos) << shown.output;

  // Then the daemon becomes ready as before, and is idle.
  ASSERT_TRUE(daemon.wait_for_line("listening ", 60s).has_value());
  json after = api.call("status");
  EXPECT_TRUE(after["result"]["busy"].is_null()) << after.dump();
  EXPECT_GE(daemon.terminate(30s), 0);
}

// The same for another client's instruments.probe: it ends within the instruments' timeouts,
// so an `echoline` command waits for it (saying so) instead of reporting the station busy.
TEST(DaemonStartup, ACommandWaitsForAProbeOfSlowInstruments) {
  testing::TempDir dir("echoline-probe-wait");
  Sim sim("tiny-lot.jsonc");
  // The analyzer answers with another identity at start-up: NOT READY, so a probe has work.
  json armed = sim.control({{"cmd", "fault"}, {"role", "receiver"}, {"kind", "wrong-identity"}, {"probability", 1}, {"seed", 1}});
  ASSERT_TRUE(armed.value("ok", false)) << armed.dump();
  Daemon daemon(write_station_config(dir.path(), sim));
  ASSERT_TRUE(sim.control({{"cmd", "clear-faults"}}).value("ok", false));
  // Now right, but every reply 1.5 s late: the probe's bring-up takes several seconds.
  ASSERT_TRUE(sim.control({{"cmd", "fault"}, {"role", "receiver"}, {"kind", "slow-reply"}, {"probability", 1},
                           {"seed", 1}, {"delay_ms", 1500}})
                  .value("ok", false));
  Api api = Api::connect(daemon);
  ASSERT_TRUE(api.call("instruments.probe").value("ok", false));
  json busy = api.call("status")["result"]["busy"];
  ASSERT_TRUE(busy.is_object() && busy.value("kind", "") == "probe") << busy.dump();
  const testing::Outcome shown =
      testing::run_to_end({testing::client_binary().string(), "status", "--socket", daemon.unix_path()}, {}, 60s);
  EXPECT_NE(shown.output.find("trying the instruments again"), std::string::npos) << shown.output;
  EXPECT_NE(shown.output.find("busy: no"), std::string::npos) << shown.output;
}

}  // namespace
}  // namespace echoline::e2e
