// A daemon whose stderr nobody reads (a paused terminal, an undrained pipe) keeps measuring:
// console log lines are dropped, never waited for; the log file keeps every line. Under
// systemd (stderr is the journal) lines carry sd-daemon priority prefixes and no timestamp.
#include <fstream>
#include <regex>
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

// Every stderr line of echolined started through /bin/sh with JOURNAL_STREAM set to
// `journal_stream`, or (when it is "match") to the "<device>:<inode>" of the stderr pipe itself,
// as systemd sets it (systemd.exec(5)).
std::vector<std::string> daemon_stderr(const std::filesystem::path& config, const std::string& journal_stream,
                                       const std::string& until) {
  const std::string set = journal_stream == "match" ? "JOURNAL_STREAM=$(stat -L -c %d:%i /proc/self/fd/2)"
                                                    : "JOURNAL_STREAM=" + journal_stream;
  testing::ChildProcess::Options po;
  po.merge_stderr = true;
  auto daemon = testing::ChildProcess::start({"/bin/sh", "-c", set + " exec \"$0\" \"$@\"", testing::daemon_binary().string(),
                                              "--config", config.string(), "--log-level", "debug", "--no-log-file"},
                                             po);
  (void)daemon.wait_for_line(until, std::chrono::seconds(30));
  (void)daemon.terminate(std::chrono::seconds(30));
  while (daemon.read_line(std::chrono::seconds(5))) {
  }
  return daemon.output_lines();
}

std::string joined(const std::vector<std::string>& lines) {
  std::string s;
  for (const auto& l : lines) s += l + "\n";
  return s;
}

TEST(DaemonStderr, UnderTheJournalLinesCarryPrioritiesAndNoTimestamp) {
  testing::TempDir dir("echoline-daemon-journal");
  Sim sim("tiny-lot.jsonc");
  const auto config = write_station_config(dir.path(), sim);
  {
    // No calibration kit: the daemon warns about it at start-up.
    json cfg = json::parse(std::ifstream(config));
    cfg.erase("calibration_kit");
    std::ofstream(config) << cfg.dump(2);
  }
  const auto lines = daemon_stderr(config, "match", "listening ");
  const std::string text = joined(lines);
  // sd-daemon(3): <4> SD_WARNING, <6> SD_INFO, <7> SD_DEBUG.
  EXPECT_NE(text.find("<6>echolined: echolined "), std::string::npos) << text;
  EXPECT_NE(text.find("<4>echolined: station config names no calibration_kit"), std::string::npos) << text;
  EXPECT_NE(text.find("<7>echolined: siggen ("), std::string::npos) << text;
  const std::regex logged(R"(^<[0-7]>echolined: \S)");
  const std::regex timestamp(R"(\d{4}-\d{2}-\d{2}T\d{2}:\d{2})");
  int log_lines = 0;
  for (const auto& l : lines) {
    if (l.rfind("listening ", 0) == 0) continue;   // the ready line on stdout
    EXPECT_TRUE(std::regex_search(l, logged)) << l;
    EXPECT_FALSE(std::regex_search(l, timestamp)) << "journald stamps the time itself: " << l;
    ++log_lines;
  }
  EXPECT_GE(log_lines, 5);
  // --no-log-file: the file sink is off.
  EXPECT_FALSE(std::filesystem::exists(dir.path() / "log" / "echolined.log"));
}

TEST(DaemonStderr, AnErrorIsPriorityThreeAndAStreamThatIsNotStderrKeepsTimestamps) {
  testing::TempDir dir("echoline-daemon-journal");
  Sim sim("tiny-lot.jsonc");
  const auto config = write_station_config(dir.path(), sim);
  {
    // A recipe that needs an attenuator on a receiver without one: refused at start-up.
    json cfg = json::parse(std::ifstream(config));
    for (auto& inst : cfg["instruments"])
      if (inst["role"] == "receiver")
        inst["profile"] = (testing::source_dir() / "config/instruments/sim-basic-receiver.jsonc").string();
    std::ofstream(config) << cfg.dump(2);
  }
  const std::string refused = joined(daemon_stderr(config, "match", "cannot run on station"));
  EXPECT_NE(refused.find("<3>echolined: recipe "), std::string::npos) << refused;   // sd-daemon(3): <3> SD_ERR

  // JOURNAL_STREAM inherited but naming another stream: plain lines with the time.
  const std::string plain = joined(daemon_stderr(config, "1:1", "cannot run on station"));
  EXPECT_EQ(plain.find("<3>"), std::string::npos) << plain;
  EXPECT_TRUE(std::regex_search(plain, std::regex(R"(\d{4}-\d{2}-\d{2}T\d{2}:\d{2}:\d{2}\.\d{3}\S* echolined error: recipe )")))
      << plain;
}

}  // namespace
}  // namespace echoline::e2e
