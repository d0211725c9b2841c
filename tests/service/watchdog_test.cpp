// The service manager's watchdog: echolined pings WATCHDOG=1 (sd_notify protocol) only while
// its sweep engine makes progress. The process test plays systemd's part with a datagram socket
// of its own: it sees the pings, hangs the engine mid-sweep with RF on (a test hook), sees the
// pings stop, then does what the unit file makes systemd do: kill the daemon, run
// ExecStopPost (`echolined --rf-off`), start it again.
#include <poll.h>
#include <signal.h>
#include <sys/socket.h>
#include <sys/un.h>
#include <unistd.h>

#include <cstdlib>
#include <fstream>
#include <iostream>
#include <sstream>

#include <gtest/gtest.h>

#include "daemon/service/engine_heartbeat.hpp"
#include "daemon/service/watchdog.hpp"
#include "tests/core/e2e_station.hpp"

namespace echoline::e2e {
namespace {

using service::EngineHeartbeat;
using Clock = std::chrono::steady_clock;

// ---- the heartbeat and the environment, in process ----

TEST(EngineHeartbeat, IdleIsAliveAndABeatHoldsForItsAllowanceOnly) {
  EngineHeartbeat hb;
  const auto now = Clock::now();
  EXPECT_TRUE(hb.alive(now + std::chrono::hours(24)));   // idle: nothing can hang
  hb.beat(std::chrono::seconds(10));
  EXPECT_TRUE(hb.alive(Clock::now()));
  EXPECT_FALSE(hb.alive(Clock::now() + std::chrono::seconds(11)));
  EXPECT_GT(hb.overdue(Clock::now() + std::chrono::seconds(11)), Clock::duration::zero());
  hb.idle();
  EXPECT_TRUE(hb.alive(Clock::now() + std::chrono::seconds(11)));
  EXPECT_EQ(hb.overdue(Clock::now() + std::chrono::seconds(11)), Clock::duration::zero());
}

TEST(EngineHeartbeat, StepAllowanceCoversEveryWaitAtTheLongerTimeout) {
  drivers::SessionOptions a, b;
  a.timeout = std::chrono::milliseconds{500};
  a.opc_timeout = std::chrono::milliseconds{4000};
  b.timeout = std::chrono::milliseconds{2000};
  b.opc_timeout = std::chrono::milliseconds{1000};
  // 3 replies at 2 s, 2 *OPC? at 4 s, 0.5 s settling, 2 s margin = 16.5 s.
  EXPECT_EQ(service::step_allowance(a, b, 3, 2, 0.5), std::chrono::milliseconds(16500));
  EXPECT_EQ(service::step_allowance(a, b, 0, 0), std::chrono::seconds(2));
}

class WatchdogEnvironment : public ::testing::Test {
 protected:
  void TearDown() override {
    ::unsetenv("WATCHDOG_USEC");
    ::unsetenv("WATCHDOG_PID");
  }
};

TEST_F(WatchdogEnvironment, PeriodComesFromWatchdogUsecForThisProcessOnly) {
  ::unsetenv("WATCHDOG_USEC");
  EXPECT_FALSE(service::watchdog_period_from_environment());
  ::setenv("WATCHDOG_USEC", "20000000", 1);
  EXPECT_EQ(service::watchdog_period_from_environment(), std::chrono::seconds(20));
  ::setenv("WATCHDOG_PID", std::to_string(::getpid()).c_str(), 1);
  EXPECT_EQ(service::watchdog_period_from_environment(), std::chrono::seconds(20));
  ::setenv("WATCHDOG_PID", std::to_string(::getpid() + 1).c_str(), 1);   // meant for another process
  EXPECT_FALSE(service::watchdog_period_from_environment());
  ::unsetenv("WATCHDOG_PID");
  for (const char* bad : {"0", "-5", "20s", ""}) {
    ::setenv("WATCHDOG_USEC", bad, 1);
    EXPECT_FALSE(service::watchdog_period_from_environment()) << bad;
  }
}

// ---- the daemon as a process ----

// The service manager's end of $NOTIFY_SOCKET: a bound datagram socket.
class NotifySocket {
 public:
  explicit NotifySocket(std::filesystem::path path) : path_(std::move(path)) {
    fd_ = ::socket(AF_UNIX, SOCK_DGRAM | SOCK_CLOEXEC, 0);
    sockaddr_un addr{};
    addr.sun_family = AF_UNIX;
    std::strncpy(addr.sun_path, path_.c_str(), sizeof(addr.sun_path) - 1);
    if (fd_ < 0 || ::bind(fd_, reinterpret_cast<sockaddr*>(&addr), sizeof(addr)) != 0) {
      throw std::runtime_error("bind " + path_.string() + ": " + std::strerror(errno));
    }
  }
  ~NotifySocket() { ::close(fd_); }
  NotifySocket(const NotifySocket&) = delete;
  NotifySocket& operator=(const NotifySocket&) = delete;

  const std::filesystem::path& path() const { return path_; }
  // The next datagram, or nullopt when none arrives within `timeout`.
  std::optional<std::string> receive(std::chrono::milliseconds timeout) {
    pollfd p{fd_, POLLIN, 0};
    if (::poll(&p, 1, static_cast<int>(timeout.count())) <= 0) return std::nullopt;
    char buf[4096];
    const ssize_t n = ::recv(fd_, buf, sizeof(buf), 0);
    if (n < 0) return std::nullopt;
    return std::string(buf, static_cast<std::size_t>(n));
  }
  // Waits for a datagram containing `needle` (others are dropped); false after `timeout`.
  bool wait_for(std::string_view needle, std::chrono::milliseconds timeout) {
    const auto until = Clock::now() + timeout;
    while (Clock::now() < until) {
      auto left = std::chrono::duration_cast<std::chrono::milliseconds>(until - Clock::now());
      auto m = receive(std::max(left, std::chrono::milliseconds(1)));
      if (m && m->find(needle) != std::string::npos) return true;
    }
    return false;
  }

 private:
  std::filesystem::path path_;
  int fd_ = -1;
};

std::string ask(LineSocket& s, const std::string& query) {
  s.write_all(query + "\n");
  return s.read_line(std::chrono::seconds(10)).value_or("<no reply>");
}

// A copy of a shipped profile with short instrument timeouts: the engine's allowance per step
// (and so the time until the pings stop) follows from them.
std::filesystem::path short_timeout_profile(const std::filesystem::path& dir, const std::string& name) {
  std::ifstream in(testing::source_dir() / "config/instruments" / (name + ".jsonc"));
  std::stringstream text;
  text << in.rdbuf();
  json profile = json::parse(text.str(), nullptr, true, /*ignore_comments=*/true);
  profile["io"]["timeout_ms"] = 500;
  profile["io"]["opc_timeout_ms"] = 1000;
  const auto file = dir / (name + ".jsonc");
  std::ofstream(file) << profile.dump(2) << "\n";
  return file;
}

testing::ChildProcess start_daemon(const std::filesystem::path& config, const std::filesystem::path& dir,
                                   std::map<std::string, std::string> env) {
  testing::ChildProcess::Options o;
  o.env = std::move(env);
  o.merge_stderr = true;   // the log lines say when the engine hangs and when the pings stop
  o.cwd = dir;             // a core dump from the SIGABRT below lands in the test's folder
  auto d = testing::ChildProcess::start({testing::daemon_binary().string(), "--config", config.string()}, o);
  if (!d.wait_for_line("listening ", std::chrono::seconds(30))) {
    std::string said;
    for (const auto& line : d.output_lines()) said += line + "\n";
    throw std::runtime_error("echolined did not start:\n" + said);
  }
  return d;
}

double seconds_between(Clock::time_point a, Clock::time_point b) { return std::chrono::duration<double>(b - a).count(); }

#ifdef ECHOLINE_TEST_HOOKS
TEST(Watchdog, HungEngineStopsThePingsThenKillRfOffAndRestartRecover) {
#else
TEST(Watchdog, DISABLED_HungEngineStopsThePingsThenKillRfOffAndRestartRecover) {   // build has no test hooks
#endif
  testing::TempDir dir("echoline-watchdog");
  NotifySocket notify(dir / "notify.sock");
  Sim sim("tiny-lot.jsonc");
  const auto config_file = write_station_config(dir.path(), sim);
  json config = json::parse(std::ifstream(config_file));
  config["instruments"][0]["profile"] = short_timeout_profile(dir.path(), "sim-source").string();
  config["instruments"][1]["profile"] = short_timeout_profile(dir.path(), "sim-receiver").string();
  std::ofstream(config_file) << config.dump(2) << "\n";

  constexpr auto kPeriod = std::chrono::seconds(2);   // WatchdogSec=2: pings every second
  const std::map<std::string, std::string> manager_env = {
      {"NOTIFY_SOCKET", notify.path().string()},
      {"WATCHDOG_USEC", std::to_string(std::chrono::microseconds(kPeriod).count())}};
  auto hang_env = manager_env;
  hang_env["ECHOLINE_TEST_HANG_AT_POINT"] = "5";

  auto daemon = start_daemon(config_file, dir.path(), hang_env);
  ASSERT_TRUE(notify.wait_for("READY=1", std::chrono::seconds(10)));
  ASSERT_TRUE(notify.wait_for("WATCHDOG=1", 3 * kPeriod)) << "an idle daemon pings";

  // A calibration waiting for the operator is not a hang: the pings go on.
  Api api(LineSocket::unix_socket((dir / "echolined.sock").string()));
  json started = api.call("cal.start");
  ASSERT_TRUE(started["ok"].get<bool>()) << started.dump();
  json prompt = api.next_event();
  ASSERT_EQ(prompt["event"], "prompt") << prompt.dump();
  EXPECT_TRUE(notify.wait_for("WATCHDOG=1", 3 * kPeriod));
  EXPECT_TRUE(notify.wait_for("WATCHDOG=1", 3 * kPeriod));

  // The OPEN sweep starts, turns RF on and hangs after point 5.
  sim.connect_standard(prompt["standard"]);
  ASSERT_TRUE(api.call("cal.answer", {{"standard", prompt["standard"]}})["ok"].get<bool>());
  ASSERT_TRUE(daemon.wait_for_line("TEST HOOK", std::chrono::seconds(30))) << "the engine never reached the hook";
  const auto hung_at = Clock::now();
  LineSocket source = LineSocket::tcp(sim.endpoint("source"));
  EXPECT_EQ(ask(source, "OUTP?"), "1") << "the hang comes with the source transmitting";

  // Pings go on for the step's allowance (its instrument timeouts), then stop for good: a
  // silence of twice the period is what would make systemd act.
  Clock::time_point last_ping = hung_at;
  bool silent = false;
  while (!silent && seconds_between(hung_at, Clock::now()) < 120) {
    auto m = notify.receive(2 * kPeriod);
    if (!m) {
      silent = true;
    } else if (m->find("WATCHDOG=1") != std::string::npos) {
      last_ping = Clock::now();
    }
  }
  ASSERT_TRUE(silent) << "the pings never stopped while the engine hung";
  EXPECT_TRUE(daemon.wait_for_line("watchdog: the sweep engine has made no progress", std::chrono::seconds(10)));
  std::cout << "[ timing   ] last ping " << seconds_between(hung_at, last_ping)
            << " s after the hang; systemd with WatchdogSec=" << kPeriod.count() << " would kill at about "
            << seconds_between(hung_at, last_ping) + static_cast<double>(kPeriod.count()) << " s\n";

  // systemd: WatchdogSignal (SIGABRT), then ExecStopPost, then Restart=on-failure.
  ::kill(daemon.pid(), SIGABRT);
  EXPECT_EQ(daemon.wait(std::chrono::seconds(10)), -SIGABRT);
  testing::ChildProcess::Options po;
  po.merge_stderr = true;
  auto rf_off = testing::ChildProcess::start(
      {testing::daemon_binary().string(), "--config", config_file.string(), "--rf-off"}, po);
  std::string rf_off_output;
  while (auto line = rf_off.read_line(std::chrono::seconds(30))) rf_off_output += *line + "\n";
  EXPECT_EQ(rf_off.wait(std::chrono::seconds(10)), 0) << rf_off_output;
  EXPECT_EQ(ask(source, "OUTP?"), "0") << "ExecStopPost left RF on: " << rf_off_output;

  auto restarted = start_daemon(config_file, dir.path(), manager_env);
  EXPECT_TRUE(notify.wait_for("READY=1", std::chrono::seconds(10)));
  EXPECT_TRUE(notify.wait_for("WATCHDOG=1", 3 * kPeriod)) << "the restarted daemon pings again";
  std::cout << "[ timing   ] hang to restarted and pinging: " << seconds_between(hung_at, Clock::now()) << " s\n";
  EXPECT_EQ(restarted.terminate(), 0);
}

}  // namespace
}  // namespace echoline::e2e
