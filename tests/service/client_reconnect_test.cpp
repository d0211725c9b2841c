// The operator console outlives a daemon restart: echoline-sim + echolined + `echoline station`
// fed from a pipe; echolined is killed with SIGKILL in the middle of a unit's test (or between
// units) and started again on the same socket and store. The console must say the link is lost,
// wait, say it is back, test the interrupted unit again, finish the rest with a true summary,
// and the store must hold no pass for the interrupted test.
#include <gtest/gtest.h>

#include <fstream>
#include <map>
#include <memory>
#include <regex>
#include <sstream>

#include <fmt/format.h>
#include <nlohmann/json.hpp>

#include "daemon/client/line_connection.hpp"
#include "daemon/client/reconnect_wait.hpp"
#include "daemon/store/run_store.hpp"
#include "tests/support/process.hpp"

namespace echoline::testing {
namespace {

using nlohmann::json;

class ReconnectBench : public ::testing::Test {
 protected:
  void SetUp() override {
    dir_ = std::make_unique<TempDir>("echoline-reconnect");
    const auto src = source_dir();
    sim_ = std::make_unique<ChildProcess>(ChildProcess::start(
        {sim_binary().string(), "--config", (src / "config/sim/instant.jsonc").string(), "--lot",
         (src / "config/sim/lots/tiny-lot.jsonc").string(), "--log-file", (*dir_ / "sim.log").string()},
        ChildProcess::Options{}));
    std::map<std::string, std::string> addr;
    for (;;) {
      auto line = sim_->read_line(20s);
      ASSERT_TRUE(line.has_value()) << "echoline-sim did not print ready";
      if (*line == "ready") break;
      auto f = parse_fields(*line);
      if (f.count("role")) addr[f["role"]] = f["address"];
    }
    ASSERT_TRUE(addr.count("source") && addr.count("receiver") && addr.count("control"));
    control_ = addr["control"];
    config_ = (*dir_ / "station.jsonc").string();
    std::ofstream(config_) << json{
        {"station", "test-bench"},
        {"data_dir", (*dir_ / "data").string()},
        {"recipe", (src / "config/recipes/whip915.jsonc").string()},
        {"instruments",
         json::array({{{"role", "source"}, {"name", "siggen"}, {"address", addr["source"]},
                       {"profile", (src / "config/instruments/sim-source.jsonc").string()}},
                      {{"role", "receiver"}, {"name", "analyzer"}, {"address", addr["receiver"]},
                       {"profile", (src / "config/instruments/sim-receiver.jsonc").string()}}})},
        {"api", {{"unix_socket", (*dir_ / "d.sock").string()}}}}
                                  .dump(2);
    start_daemon();
  }

  void TearDown() override {
    if (daemon_ && daemon_->running()) {
      EXPECT_EQ(daemon_->terminate(10s), 0);
    }
    if (sim_) sim_->terminate(5s);
  }

  void start_daemon() {
    daemon_ = std::make_unique<ChildProcess>(
        ChildProcess::start({daemon_binary().string(), "--config", config_, "--log-level", "warn"}, ChildProcess::Options{}));
    ASSERT_TRUE(daemon_->wait_for_line("listening", 30s).has_value()) << "echolined did not start";
  }

  // One request on the simulator's fixture control port.
  json control(const json& request) {
    auto c = client::LineConnection::connect_address(control_, client::Millis{3000});
    EXPECT_TRUE(c.ok());
    if (!c) return json::object();
    EXPECT_TRUE((*c)->write_line(request.dump()).ok());
    auto line = (*c)->read_line(client::Millis{5000});
    EXPECT_TRUE(line.ok());
    return line ? json::parse(*line, nullptr, false) : json::object();
  }

  ChildProcess start_console(std::vector<std::string> extra = {}) {
    std::vector<std::string> args = {client_binary().string(), "station", "--config", config_, "--sim-fixture", control_,
                                     "--lot", "TINY", "--operator", "ci"};
    args.insert(args.end(), extra.begin(), extra.end());
    ChildProcess::Options o;
    o.pipe_stdin = true;
    o.merge_stderr = true;
    return ChildProcess::start(args, o);
  }

  // Reads the console's output to its end; returns the exit code (-999 when it did not exit).
  static int finish(ChildProcess& p, std::string& text) {
    while (p.read_line(60s)) {
    }
    for (const auto& l : p.output_lines()) text += l + "\n";
    return p.wait(30s).value_or(-999);
  }

  // serial -> (verdict, run id) lines "  Unit <serial>   verdict <v> ...   run <id>", in order.
  struct Shown {
    std::string serial, verdict, run_id;
  };
  static std::vector<Shown> shown(const std::string& text) {
    std::vector<Shown> out;
    static const std::regex re(R"(\s+Unit (\S+)\s+verdict (\w+).*\s+run (\S+))");
    std::istringstream in(text);
    std::string l;
    while (std::getline(in, l)) {
      std::smatch m;
      if (std::regex_search(l, m, re)) out.push_back({m[1], m[2], m[3]});
    }
    return out;
  }

  std::vector<core::RunResult> stored_runs(const std::string& serial) {
    auto s = store::RunStore::open(*dir_ / "data" / "test-bench.sqlite");
    EXPECT_TRUE(s.ok()) << (s ? "" : s.error().message);
    if (!s) return {};
    auto h = (*s)->history(serial);
    EXPECT_TRUE(h.ok()) << (h ? "" : h.error().message);
    return h ? *h : std::vector<core::RunResult>{};
  }

  std::unique_ptr<TempDir> dir_;
  std::unique_ptr<ChildProcess> sim_, daemon_;
  std::string control_, config_;
};

// The schedule documented in daemon/client/README.md: 1 s, 2 s, 4 s, then every 5 s (capped).
// Exponential backoff with a cap: common practice, no source.
TEST(ReconnectSchedule, DoublesFromOneSecondAndIsCappedAtFive) {
  using client::reconnect_delay;
  EXPECT_EQ(reconnect_delay(1).count(), 1);
  EXPECT_EQ(reconnect_delay(2).count(), 2);
  EXPECT_EQ(reconnect_delay(3).count(), 4);
  for (int a = 4; a < 100; ++a) EXPECT_EQ(reconnect_delay(a).count(), 5) << a;
}

TEST_F(ReconnectBench, KilledMidTestTheConsoleWaitsRetestsTheUnitAndFinishesTheLot) {
  ChildProcess console = start_console();
  // Three empty lines confirm the calibration standards (the simulator connects them).
  console.write_stdin("\n\n\nTINY-01\n");
  ASSERT_TRUE(console.wait_for_line("Unit TINY-01", 60s).has_value()) << "first unit not judged";

  // Slow the analyzer's replies (real wall time) so TINY-02's sweep is still running when the
  // daemon dies; 300 ms stays below the receiver profile's 2000 ms reply timeout.
  const json armed = control({{"cmd", "fault"}, {"role", "receiver"}, {"kind", "slow-reply"}, {"probability", 1},
                              {"seed", 1}, {"delay_ms", 300}});
  ASSERT_TRUE(armed.value("ok", false)) << armed.dump();
  console.write_stdin("TINY-02\n");
  ASSERT_TRUE(console.wait_for_line("measuring TINY-02: point 1 of", 60s).has_value()) << "TINY-02 did not start";
  EXPECT_EQ(daemon_->kill_now(), -9);

  ASSERT_TRUE(console.wait_for_line("station service not reachable", 30s).has_value());
  // Plain words: the unit in the fixture was not judged.
  ASSERT_FALSE(console.output_lines().empty());
  EXPECT_NE(console.output_lines().back().find("(TINY-02) was NOT judged, test it again"), std::string::npos)
      << console.output_lines().back();
  // Retries on a pipe: one line per attempt.
  ASSERT_TRUE(console.wait_for_line("attempt 1 after", 30s).has_value());

  const json cleared = control({{"cmd", "clear-faults"}});
  ASSERT_TRUE(cleared.value("ok", false)) << cleared.dump();
  start_daemon();   // same config: same socket path, same store file
  ASSERT_TRUE(console.wait_for_line("station service back", 60s).has_value());

  console.write_stdin("TINY-03\n");
  console.close_stdin();
  std::string text;
  const int code = finish(console, text);
  EXPECT_EQ(code, 0) << text;

  const auto units = shown(text);
  ASSERT_EQ(units.size(), 3u) << text;
  EXPECT_EQ(units[0].serial, "TINY-01");
  EXPECT_EQ(units[1].serial, "TINY-02") << "the interrupted unit is tested again before the next line\n" << text;
  EXPECT_EQ(units[2].serial, "TINY-03");
  EXPECT_NE(text.find("Scan serial: TINY-02   (tested again: its test was interrupted)"), std::string::npos) << text;
  // The re-queued unit is not asked the retest question (it would eat the next piped line).
  EXPECT_EQ(text.find("TINY-02 already tested"), std::string::npos) << text;

  // Summary counts: three units, three runs (the cut-off test gave no result), verdicts as shown.
  std::map<std::string, int> counts;
  for (const auto& u : units) ++counts[u.verdict];
  const std::string summary = fmt::format("summary units=3 runs=3 pass={} fail={} inconclusive={} aborted={}",
                                          counts["pass"], counts["fail"], counts["inconclusive"], counts["aborted"]);
  EXPECT_NE(text.find(summary), std::string::npos) << summary << "\n" << text;
  EXPECT_NE(text.find("Tests interrupted by a lost station service: 1 ("), std::string::npos) << text;

  // The store: every TINY-02 run other than the retest shown by the console is aborted (a run that
  // did not finish is never a pass); SIGKILL leaves none at all, SIGTERM one aborted.
  const auto runs = stored_runs("TINY-02");
  ASSERT_FALSE(runs.empty());
  int retests_found = 0;
  for (const auto& r : runs) {
    if (r.run_id == units[1].run_id) {
      ++retests_found;
      EXPECT_EQ(core::to_string(r.verdict), units[1].verdict);
    } else {
      EXPECT_EQ(r.verdict, core::Verdict::aborted) << r.run_id;
    }
  }
  EXPECT_EQ(retests_found, 1);
  EXPECT_EQ(stored_runs("TINY-03").size(), 1u);
}

TEST_F(ReconnectBench, KilledBetweenUnitsTheNextSerialIsTestedOnceTheDaemonIsBack) {
  ChildProcess console = start_console();
  console.write_stdin("\n\n\nTINY-04\n");
  ASSERT_TRUE(console.wait_for_line("Unit TINY-04", 60s).has_value());
  EXPECT_EQ(daemon_->kill_now(), -9);
  start_daemon();
  // The console notices only when it next talks to the daemon, i.e. with the next serial.
  console.write_stdin("TINY-05\n");
  console.close_stdin();
  std::string text;
  EXPECT_EQ(finish(console, text), 0) << text;
  EXPECT_NE(text.find("station service not reachable"), std::string::npos) << text;
  EXPECT_NE(text.find("station service back"), std::string::npos) << text;
  const auto units = shown(text);
  ASSERT_EQ(units.size(), 2u) << text;
  EXPECT_EQ(units[1].serial, "TINY-05");
  EXPECT_NE(text.find("summary units=2 runs=2"), std::string::npos) << text;
}

TEST_F(ReconnectBench, OnAPipeTheConsoleGivesUpAfterTheReconnectTimeoutWithExitThree) {
  ChildProcess console = start_console({"--reconnect-timeout", "3"});
  console.write_stdin("\n\n\nTINY-06\n");
  ASSERT_TRUE(console.wait_for_line("Unit TINY-06", 60s).has_value());
  EXPECT_EQ(daemon_->kill_now(), -9);
  console.write_stdin("TINY-07\n");
  console.close_stdin();
  std::string text;
  // Exit code 3: the daemon could not be reached (daemon/client/README.md, exit codes).
  EXPECT_EQ(finish(console, text), 3) << text;
  EXPECT_NE(text.find("station service not reachable"), std::string::npos) << text;
  EXPECT_NE(text.find("giving up"), std::string::npos) << text;
  EXPECT_EQ(text.find("station service back"), std::string::npos) << text;
  EXPECT_NE(text.find("summary units=1 runs=1"), std::string::npos) << text;
  daemon_.reset();   // already dead
}

TEST_F(ReconnectBench, TheHelpDocumentsTheReconnectTimeout) {
  ChildProcess p = ChildProcess::start({client_binary().string(), "station", "--help"}, ChildProcess::Options{});
  std::string text;
  EXPECT_EQ(finish(p, text), 0);
  EXPECT_NE(text.find("--reconnect-timeout SECONDS"), std::string::npos) << text;
  ChildProcess::Options o;
  o.merge_stderr = true;
  ChildProcess bad = ChildProcess::start({client_binary().string(), "station", "--reconnect-timeout", "soon"}, o);
  std::string err;
  EXPECT_EQ(finish(bad, err), 2) << err;   // usage error (README, exit codes)
  EXPECT_NE(err.find("--reconnect-timeout soon"), std::string::npos) << err;
}

}  // namespace
}  // namespace echoline::testing
