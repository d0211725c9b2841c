// `echolined --rf-off`: the safety step the service manager runs after any stop, crash included
// (ExecStopPost in config/echolined.service). Real processes: echoline-sim and echolined.
#include <gtest/gtest.h>

#include "tests/core/e2e_station.hpp"

namespace echoline::e2e {
namespace {

struct RfOffRun {
  int exit_code = -1;
  std::string output;
};

RfOffRun run_rf_off(const std::filesystem::path& config) {
  testing::ChildProcess::Options po;
  po.merge_stderr = true;
  auto child = testing::ChildProcess::start({testing::daemon_binary().string(), "--config", config.string(), "--rf-off"}, po);
  RfOffRun r;
  while (auto line = child.read_line(std::chrono::seconds(30))) r.output += *line + "\n";
  auto code = child.wait(std::chrono::seconds(5));
  if (!code) child.kill_now();
  r.exit_code = code.value_or(-1);
  return r;
}

std::string ask(LineSocket& s, const std::string& query) {
  s.write_all(query + "\n");
  auto line = s.read_line(std::chrono::seconds(10));
  return line.value_or("<no reply>");
}

TEST(RfOff, SwitchesALiveSourceOffAndConfirmsIt) {
  testing::TempDir dir("echoline-rf-off");
  Sim sim("tiny-lot.jsonc");
  const auto config = write_station_config(dir.path(), sim);
  LineSocket source = LineSocket::tcp(sim.endpoint("source"));
  source.write_all("OUTP ON\n");
  ASSERT_EQ(ask(source, "OUTP?"), "1");   // SCPI-1999 Vol 1 7.3: a Boolean query answers 1 or 0 (section from memory)

  const RfOffRun r = run_rf_off(config);
  EXPECT_EQ(r.exit_code, 0) << r.output;
  // It says what it is doing first: a source that does not answer holds it for its timeouts.
  EXPECT_LT(r.output.find("switching the RF output of source siggen"), r.output.find("RF output off, confirmed")) << r.output;
  EXPECT_NE(r.output.find("RF output off, confirmed"), std::string::npos) << r.output;
  EXPECT_EQ(ask(source, "OUTP?"), "0") << r.output;
}

TEST(RfOff, UnreachableSourceExitsOneAndSaysSo) {
  testing::TempDir dir("echoline-rf-off");
  Sim sim("tiny-lot.jsonc");
  auto config = write_station_config(dir.path(), sim);
  // The source moved to a port nobody listens on (port 1 on loopback: refused at once).
  json cfg = json::parse(std::ifstream(config));
  cfg["instruments"][0]["address"] = "tcp://127.0.0.1:1";
  std::ofstream(config) << cfg.dump(2) << "\n";

  const RfOffRun r = run_rf_off(config);
  EXPECT_EQ(r.exit_code, 1) << r.output;
  EXPECT_NE(r.output.find("siggen"), std::string::npos) << r.output;
  EXPECT_NE(r.output.find("NOT confirmed off"), std::string::npos) << r.output;
  EXPECT_NE(r.output.find("front panel"), std::string::npos) << r.output;
}

TEST(RfOff, BadConfigExitsTwo) {
  testing::TempDir dir("echoline-rf-off");
  const auto config = dir.path() / "station.jsonc";
  std::ofstream(config) << "{ \"station\": \"x\" ";   // cut short
  const RfOffRun r = run_rf_off(config);
  EXPECT_EQ(r.exit_code, 2) << r.output;
  EXPECT_NE(r.output.find("station.jsonc"), std::string::npos) << r.output;
}

}  // namespace
}  // namespace echoline::e2e
