// echoline-sim as a process: command line, endpoint lines, ready, clean stop, config errors,
// pty links; plus the config loader and latency profiles as pure code.
#include <filesystem>
#include <fstream>

#include <gtest/gtest.h>

#include "drivers/config_error.hpp"
#include "simulator/latency.hpp"
#include "simulator/sim_config.hpp"
#include "tests/simulator/sim_fixture.hpp"

namespace echoline::sim::testing {
namespace {

using echoline::testing::parse_fields;

TEST(SimProcess, HelpExitsZeroAndNamesTheOptions) {
  auto p = ChildProcess::start({echoline::testing::sim_binary().string(), "--help"});
  std::string all;
  while (auto line = p.read_line(std::chrono::seconds(10))) all += *line + "\n";
  EXPECT_EQ(p.wait(std::chrono::seconds(10)), 0);
  for (const char* needle : {"--config", "--lot", "--profile", "--log-file", "ready", "Exit codes"}) {
    EXPECT_NE(all.find(needle), std::string::npos) << needle;
  }
}

TEST(SimProcess, MissingConfigIsAUsageError) {
  auto p = ChildProcess::start({echoline::testing::sim_binary().string()}, {{}, false, true, {}});
  EXPECT_EQ(p.wait(std::chrono::seconds(10)), 2);
}

TEST(SimProcess, UnreadableConfigIsAConfigError) {
  auto p = ChildProcess::start({echoline::testing::sim_binary().string(), "--config", "/nonexistent/sim.jsonc"},
                               {{}, false, true, {}});
  auto line = p.read_line(std::chrono::seconds(10));
  ASSERT_TRUE(line.has_value());
  EXPECT_NE(line->find("/nonexistent/sim.jsonc"), std::string::npos) << *line;
  EXPECT_EQ(p.wait(std::chrono::seconds(10)), 2);
}

TEST(SimProcess, BadConfigValueNamesFileLineAndKey) {
  TempDir dir;
  const auto path = dir / "bad.jsonc";
  std::ofstream(path) << "{\n  \"instruments\": {\n    \"source\": {\"endpoints\": {\"tcp\": {\"port\": 70000}}},\n"
                         "    \"receiver\": {\"endpoints\": {\"tcp\": {}}}\n  }\n}\n";
  auto p = ChildProcess::start({echoline::testing::sim_binary().string(), "--config", path.string()},
                               {{}, false, true, {}});
  auto line = p.read_line(std::chrono::seconds(10));
  ASSERT_TRUE(line.has_value());
  EXPECT_NE(line->find(path.string() + ":3:"), std::string::npos) << *line;
  EXPECT_NE(line->find("/instruments/source/endpoints/tcp/port"), std::string::npos) << *line;
  EXPECT_EQ(p.wait(std::chrono::seconds(10)), 2);
}

TEST(SimProcess, BadInstrumentSettingIsAConfigErrorNamingTheSection) {
  TempDir dir;
  json cfg = read_config("config/sim/instant.jsonc");
  cfg["instruments"]["receiver"]["settings"]["identity"] = "only,three,fields";
  const auto path = write_config(dir, cfg);
  auto p = ChildProcess::start({echoline::testing::sim_binary().string(), "--config", path.string(), "--log-file",
                                (dir / "sim.log").string()}, {{}, false, true, {}});
  auto line = p.read_line(std::chrono::seconds(10));
  ASSERT_TRUE(line.has_value());
  EXPECT_NE(line->find(path.string()), std::string::npos) << *line;
  EXPECT_NE(line->find("/instruments/receiver/settings"), std::string::npos) << *line;
  EXPECT_NE(line->find("identity"), std::string::npos) << *line;
  EXPECT_EQ(p.wait(std::chrono::seconds(10)), 2);
}

TEST(SimProcess, PrintsOneEndpointLinePerEndpointThenReadyAndStopsCleanlyOnSigterm) {
  TempDir dir;
  RunningSim sim({"--config", repo_file("config/sim/instant.jsonc").string(), "--log-file", (dir / "sim.log").string()});
  ASSERT_TRUE(sim.ok());
  for (const char* key : {"source/tcp", "receiver/tcp", "switch/tcp", "control/tcp"}) {
    ASSERT_TRUE(sim.has(key)) << key;
    EXPECT_EQ(sim.address(key).rfind("tcp://127.0.0.1:", 0), 0u) << sim.address(key);
    EXPECT_NE(sim.address(key), "tcp://127.0.0.1:0") << "port 0 must be replaced by the bound port";
  }
  EXPECT_EQ(sim.endpoints().size(), 4u);
  // The endpoints really listen: a query round-trips.
  auto s = sim.session("source/tcp");
  auto idn = s->query("*IDN?");
  ASSERT_TRUE(idn.ok()) << idn.error().message;
  EXPECT_EQ(sim.process().terminate(std::chrono::seconds(5)), 0);
  // Every command received is logged with role and endpoint.
  std::ifstream log(dir / "sim.log");
  std::string text((std::istreambuf_iterator<char>(log)), std::istreambuf_iterator<char>());
  EXPECT_NE(text.find("source tcp 127.0.0.1:"), std::string::npos);
  EXPECT_NE(text.find("<- *IDN?"), std::string::npos);
}

TEST(SimProcess, SigintAlsoStopsCleanly) {
  TempDir dir;
  RunningSim sim({"--config", repo_file("config/sim/instant.jsonc").string(), "--log-file", (dir / "sim.log").string()});
  ASSERT_TRUE(sim.ok());
  ::kill(sim.process().pid(), SIGINT);
  EXPECT_EQ(sim.process().wait(std::chrono::seconds(5)), 0);
}

TEST(SimProcess, PtyEndpointPrintsSerialAddressAndItsLinkIsRemovedAtExit) {
  TempDir dir;
  json cfg = read_config("config/sim/instant-serial.jsonc");
  const auto link = dir / "receiver-link";
  cfg["instruments"]["receiver"]["endpoints"]["pty"]["link"] = link.string();
  const auto path = write_config(dir, cfg);
  RunningSim sim({"--config", path.string(), "--log-file", (dir / "sim.log").string()});
  ASSERT_TRUE(sim.ok());
  ASSERT_TRUE(sim.has("receiver/pty"));
  const std::string address = sim.address("receiver/pty");
  EXPECT_EQ(address.rfind("serial:/dev/pts/", 0), 0u) << address;
  EXPECT_NE(address.find("?baud=115200"), std::string::npos) << address;
  EXPECT_EQ(sim.endpoints().at("receiver/pty").at("link"), link.string());
  EXPECT_TRUE(std::filesystem::is_symlink(link));
  EXPECT_EQ(std::filesystem::read_symlink(link).string(), address.substr(7, address.find('?') - 7));
  EXPECT_EQ(sim.process().terminate(std::chrono::seconds(5)), 0);
  EXPECT_FALSE(std::filesystem::exists(std::filesystem::symlink_status(link)));
}

TEST(SimProcess, ConfiguredPortInUseIsARuntimeFailure) {
  TempDir dir;
  RunningSim first({"--config", repo_file("config/sim/instant.jsonc").string(), "--log-file", (dir / "a.log").string()});
  ASSERT_TRUE(first.ok());
  const std::string taken = first.address("source/tcp");
  json cfg = read_config("config/sim/instant.jsonc");
  cfg["instruments"]["source"]["endpoints"]["tcp"]["port"] = std::stoi(taken.substr(taken.rfind(':') + 1));
  const auto path = write_config(dir, cfg);
  auto p = ChildProcess::start({echoline::testing::sim_binary().string(), "--config", path.string(), "--log-file",
                                (dir / "b.log").string()}, {{}, false, true, {}});
  auto line = p.read_line(std::chrono::seconds(10));
  ASSERT_TRUE(line.has_value());
  EXPECT_NE(line->find("cannot listen"), std::string::npos) << *line;
  EXPECT_EQ(p.wait(std::chrono::seconds(10)), 1);
}

TEST(SimConfigLoader, RepoConfigsLoad) {
  for (const char* name : {"config/sim/instant.jsonc", "config/sim/bench.jsonc", "config/sim/instant-serial.jsonc"}) {
    SimConfig cfg = load_sim_config(repo_file(name));
    EXPECT_GE(cfg.instruments.size(), 2u) << name;
    ASSERT_TRUE(cfg.lot.has_value()) << name;
    EXPECT_TRUE(std::filesystem::exists(*cfg.lot)) << cfg.lot->string();
  }
  EXPECT_TRUE(load_sim_config(repo_file("config/sim/instant.jsonc")).latency.instant);
  EXPECT_FALSE(load_sim_config(repo_file("config/sim/bench.jsonc")).latency.instant);
}

TEST(SimConfigLoader, UnknownKeyIsRefusedWithItsLine) {
  const std::string text = "{\n \"instruments\": {\n  \"source\": {\"endpoints\": {\"tcp\": {}}},\n"
                           "  \"receiver\": {\"endpoints\": {\"tcp\": {}}, \"setings\": {}}\n }\n}\n";
  try {
    parse_sim_config(text, "t.jsonc");
    FAIL() << "a misspelt key must be refused";
  } catch (const drivers::ConfigError& e) {
    EXPECT_EQ(e.line, 4);
    EXPECT_NE(std::string(e.what()).find("setings"), std::string::npos) << e.what();
  }
}

TEST(SimConfigLoader, ReceiverIsRequired) {
  EXPECT_THROW(parse_sim_config("{\"instruments\": {\"source\": {\"endpoints\": {\"tcp\": {}}}}}", "t.jsonc"),
               drivers::ConfigError);
}

TEST(SimConfigLoader, EndpointNeedsTcpOrPty) {
  EXPECT_THROW(parse_sim_config("{\"instruments\": {\"source\": {\"endpoints\": {}}, \"receiver\": {\"endpoints\": {\"tcp\": {}}}}}",
                                "t.jsonc"),
               drivers::ConfigError);
}

TEST(SimConfigLoader, FaultsInTheConfigAreParsed) {
  SimConfig cfg = parse_sim_config(
      "{\"instruments\": {\"source\": {\"endpoints\": {\"tcp\": {}}, \"faults\": [{\"kind\": \"slow-reply\", "
      "\"probability\": 0.25, \"seed\": 9, \"delay_ms\": 40}]}, \"receiver\": {\"endpoints\": {\"tcp\": {}}}}}",
      "t.jsonc");
  ASSERT_EQ(cfg.instruments.at(0).faults.size(), 1u);
  const FaultSpec& f = cfg.instruments.at(0).faults.at(0);
  EXPECT_EQ(f.kind, FaultKind::slow_reply);
  EXPECT_DOUBLE_EQ(f.probability, 0.25);
  EXPECT_EQ(f.seed, 9u);
  EXPECT_DOUBLE_EQ(f.delay_ms, 40);
}

TEST(LatencyProfile, InstantWaitsNothingAndBenchAddsProcessingTime) {
  const LatencyProfile instant = *latency_profile("instant");
  const LatencyProfile bench = *latency_profile("bench");
  EXPECT_EQ(reply_wait_s(instant, 0.25), 0);
  EXPECT_DOUBLE_EQ(reply_wait_s(bench, 0.25), bench.command_s + 0.25);
  EXPECT_GT(bench.command_s, 0);
  EXPECT_FALSE(latency_profile("fast").has_value());
}

TEST(LatencyProfile, InstantClockMovesPastEveryModelledWait) {
  LatencyProfile p = *latency_profile("instant");
  SimClock clock(p);
  const double t1 = clock.next_message_time();
  clock.waited(30.0);   // the client waited for a 30 s sweep
  const double t2 = clock.next_message_time();
  EXPECT_GE(t2 - t1, 30.0 + p.instant_step_s - 1e-9);
}

}  // namespace
}  // namespace echoline::sim::testing
