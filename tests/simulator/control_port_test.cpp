// The fixture control port: requests handled by ControlService directly (no socket), and the
// port of a running echoline-sim staying usable after bad requests.
#include <cmath>

#include <gtest/gtest.h>

#include "simulator/control_port.hpp"
#include "simulator/physics/dut_models.hpp"
#include "tests/simulator/control_service_fixture.hpp"

namespace echoline::sim::testing {
namespace {

using ControlServiceTest = ControlServiceFixture;

TEST_F(ControlServiceTest, ConnectsStandardsAndTheyReflectAsStandards) {
  json r = ask({{"cmd", "connect"}, {"standard", "SHORT"}});
  ASSERT_TRUE(r.value("ok", false)) << r.dump();
  ASSERT_NE(world_.connected, nullptr);
  EXPECT_EQ(world_.connected_name, "SHORT");
  // A SHORT reflects fully: |Gamma| = 1 (definition of a short standard, common practice).
  EXPECT_NEAR(std::abs(world_.connected->gamma(915e6)), 1.0, 0.01);
  ASSERT_TRUE(ask({{"cmd", "connect"}, {"standard", "LOAD"}}).value("ok", false));
  // The LOAD reflects little (|Gamma| < 0.1, i.e. RL > 20 dB).
  EXPECT_LT(std::abs(world_.connected->gamma(915e6)), 0.1);
  EXPECT_FALSE(ask({{"cmd", "connect"}, {"standard", "THRU"}}).value("ok", true));
}

TEST_F(ControlServiceTest, ConnectsAUnitBySerialAndDisconnects) {
  const std::string serial = lot_.units.at(0).serial;
  json r = ask({{"cmd", "connect"}, {"unit", serial}});
  ASSERT_TRUE(r.value("ok", false)) << r.dump();
  EXPECT_EQ(world_.connected_name, serial);
  EXPECT_NE(world_.connected, nullptr);
  ASSERT_TRUE(ask({{"cmd", "disconnect"}}).value("ok", false));
  EXPECT_EQ(world_.connected, nullptr);
  EXPECT_EQ(world_.connected_name, "");
}

TEST_F(ControlServiceTest, UnknownSerialIsAnErrorNamingIt) {
  json r = ask({{"cmd", "connect"}, {"unit", "NOPE-99"}});
  EXPECT_FALSE(r.value("ok", true));
  EXPECT_NE(r.value("error", std::string{}).find("NOPE-99"), std::string::npos) << r.dump();
}

TEST_F(ControlServiceTest, UnitsListsTheLot) {
  json r = ask({{"cmd", "units"}});
  ASSERT_TRUE(r.value("ok", false));
  ASSERT_EQ(r["units"].size(), lot_.units.size());
  EXPECT_EQ(r["units"][0], lot_.units[0].serial);
}

TEST_F(ControlServiceTest, TruthMatchesThePhysicsModel) {
  const SimUnit& u = lot_.units.at(0);
  json r = ask({{"cmd", "truth"}, {"unit", u.serial}, {"frequencies_hz", {902e6, 915e6, 928e6}}});
  ASSERT_TRUE(r.value("ok", false)) << r.dump();
  ASSERT_EQ(r["return_loss_db"].size(), 3u);
  EXPECT_DOUBLE_EQ(r["return_loss_db"][1].get<double>(), true_return_loss_db(u, 915e6));
  // f0 scales as 1/length (f·L ~ const, textbook / common practice).
  EXPECT_NEAR(r["f0_hz"].get<double>(),
              u.antenna.nominal_f0_hz * u.antenna.nominal_length_mm / u.antenna.element_length_mm, 1.0);
  EXPECT_EQ(r["defect"], u.defect);
  EXPECT_DOUBLE_EQ(r["element_length_mm"].get<double>(), u.antenna.element_length_mm);
}

TEST_F(ControlServiceTest, BadRequestsAreAnsweredWithErrors) {
  for (const char* line : {"not json", "[1,2]", "{}", "{\"cmd\":\"explode\"}", "{\"cmd\":\"truth\",\"unit\":7}",
                           "{\"cmd\":\"fault\",\"role\":\"source\",\"kind\":\"garble\"}",
                           "{\"cmd\":\"truth\",\"unit\":\"TINY-01\",\"frequencies_hz\":[\"a\"]}"}) {
    json r = control_.handle(line);
    EXPECT_FALSE(r.value("ok", true)) << line;
    EXPECT_FALSE(r.value("error", std::string{}).empty()) << line;
  }
}

TEST_F(ControlServiceTest, StatusNamesTheConnectedDut) {
  ASSERT_TRUE(ask({{"cmd", "connect"}, {"standard", "OPEN"}}).value("ok", false));
  json r = ask({{"cmd", "status"}});
  ASSERT_TRUE(r.value("ok", false));
  EXPECT_EQ(r["connected"], "OPEN");
  EXPECT_EQ(r["lot"], lot_.name);
  EXPECT_EQ(r["profile"], "instant");
}

TEST(ControlPortProcess, KeepsWorkingAfterBadJson) {
  TempDir dir;
  RunningSim sim({"--config", repo_file("config/sim/instant.jsonc").string(), "--log-file", (dir / "sim.log").string()});
  ASSERT_TRUE(sim.ok());
  json bad = sim.control_raw("{\"cmd\": ");
  EXPECT_FALSE(bad.value("ok", true));
  EXPECT_NE(bad.value("error", std::string{}).find("JSON"), std::string::npos) << bad.dump();
  json unknown = sim.control({{"cmd", "levitate"}});
  EXPECT_FALSE(unknown.value("ok", true));
  json fault = sim.control({{"cmd", "fault"}, {"role", "oscilloscope"}, {"kind", "drop"}});
  EXPECT_FALSE(fault.value("ok", true));
  json kind = sim.control({{"cmd", "fault"}, {"role", "source"}, {"kind", "meltdown"}});
  EXPECT_FALSE(kind.value("ok", true));
  json units = sim.control({{"cmd", "units"}});
  ASSERT_TRUE(units.value("ok", false)) << units.dump();
  EXPECT_EQ(units["lot"], "whip915-lot-a");
  EXPECT_EQ(units["units"].size(), 240u);
  EXPECT_EQ(sim.process().terminate(), 0);
}

TEST(ControlPortProcess, LotOnTheCommandLineReplacesTheConfigLot) {
  TempDir dir;
  RunningSim sim({"--config", repo_file("config/sim/instant.jsonc").string(), "--lot",
                  repo_file("config/sim/lots/tiny-lot.jsonc").string(), "--log-file", (dir / "sim.log").string()});
  ASSERT_TRUE(sim.ok());
  json units = sim.control({{"cmd", "units"}});
  ASSERT_TRUE(units.value("ok", false));
  EXPECT_EQ(units["lot"], "tiny-lot");
  EXPECT_EQ(units["units"].size(), 12u);
}

}  // namespace
}  // namespace echoline::sim::testing
