// A daemon whose stderr nobody reads (a paused terminal, an undrained pipe) keeps measuring:
// console log lines are dropped, never waited for; the log file keeps every line.
#include <fstream>
#include <sstream>

#include <gtest/gtest.h>

#include "tests/core/e2e_station.hpp"

namespace echoline::e2e {
namespace {

TEST(DaemonStderr, UnreadStderrDoesNotStallTestsAndTheLogFileKeepsEverything) {
  testing::TempDir dir("echoline-daemon-stderr");
  Sim sim("tiny-lot.jsonc");
  const auto config = write_station_config(dir.path(), sim);
  testing::ChildProcess::Options po;
  po.merge_stderr = true;   // stderr into the pipe this test stops reading after "listening"
  // trace: one log line per SCPI exchange, so a calibration alone writes far more than the
  // 64 KiB a Linux pipe holds (man 7 pipe, "Pipe capacity").
  auto daemon = testing::ChildProcess::start(
      {testing::daemon_binary().string(), "--config", config.string(), "--log-level", "trace"}, po);
  auto line = daemon.wait_for_line("listening ", std::chrono::seconds(30));
  ASSERT_TRUE(line.has_value());
  auto f = testing::parse_fields(*line);
  Api api(LineSocket::unix_socket(f["unix"]));

  json cal = calibrate(api, sim);
  ASSERT_EQ(cal["event"], "result") << cal.dump();
  for (const std::string serial : {"TINY-01", "TINY-02", "TINY-03"}) {
    json run = test_unit(api, sim, serial, "TINY");
    EXPECT_NE(run["verdict"], "aborted") << run.dump();
  }
  std::ifstream in(dir.path() / "log" / "echolined.log");
  std::stringstream text;
  text << in.rdbuf();
  const std::string log = text.str();
  EXPECT_GT(log.size(), 64u * 1024u);   // more than the pipe could ever have held
  EXPECT_NE(log.find("serial TINY-03"), std::string::npos);
  EXPECT_NE(log.find("INIT:IMM"), std::string::npos);   // trace lines reach the file
  EXPECT_GE(daemon.terminate(std::chrono::seconds(30)), 0);
}

}  // namespace
}  // namespace echoline::e2e
