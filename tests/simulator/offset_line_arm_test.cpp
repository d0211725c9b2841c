// The offset-line arm of the bench: the "standards"/"offset_line" config object, the switch's
// DUT-OFFSET position and the control port's "via":"offset-line", and a running echoline-sim
// whose receiver reads a unit through the line as the model predicts.
#include <algorithm>
#include <cmath>

#include <gtest/gtest.h>

#include "drivers/config_error.hpp"
#include "drivers/scpi_codec.hpp"
#include "simulator/control_port.hpp"
#include "simulator/instrument.hpp"
#include "simulator/physics/lot.hpp"
#include "simulator/physics/offset_line.hpp"
#include "simulator/sim_config.hpp"
#include "tests/simulator/control_service_fixture.hpp"

namespace echoline::sim::testing {
namespace {

// instant.jsonc (no lot) with "standards"/"offset_line" replaced, as text for parse_sim_config.
std::string instant_with_line(const json& line) {
  json cfg = read_config("config/sim/instant.jsonc");
  cfg.erase("lot");
  cfg["standards"]["offset_line"] = line;
  return cfg.dump(2);
}

std::string config_error(const std::string& text) { return sim_config_error(text); }

TEST(OffsetLineConfig, ReadWithDefaultsLimitsAndUnknownKeysRefused) {
  // The shipped benches state the defaults (the line as built, a little off 273.2 ps).
  for (const char* file : {"config/sim/instant.jsonc", "config/sim/instant-d25.jsonc", "config/sim/bench.jsonc"}) {
    const SimConfig c = load_sim_config(repo_file(file));
    EXPECT_EQ(c.standards.offset_line.delay_ps, 274.0) << file;
    EXPECT_EQ(c.standards.offset_line.loss_db, 0.08) << file;
    EXPECT_EQ(c.standards.offset_line.match_return_loss_db, 46) << file;
    EXPECT_EQ(c.standards.offset_line.match_phase_deg, 40) << file;
    bool has_arm = false;
    for (const auto& inst : c.instruments) {
      if (inst.role == "switch") has_arm = inst.settings["positions"].value("7", std::string{}) == "DUT-OFFSET";
    }
    EXPECT_TRUE(has_arm) << file << ": switch position 7 is DUT-OFFSET";
  }
  const OffsetLineParams d;
  EXPECT_EQ(d.delay_ps, 274.0);
  EXPECT_EQ(d.far_match_phase_deg, -70);
  // Every key optional; the others keep their defaults.
  const SimConfig some = parse_sim_config(instant_with_line({{"delay_ps", 260}, {"loss_db", 0.3}}), "sim.jsonc");
  EXPECT_EQ(some.standards.offset_line.delay_ps, 260);
  EXPECT_EQ(some.standards.offset_line.loss_db, 0.3);
  EXPECT_EQ(some.standards.offset_line.match_return_loss_db, 46);
  // Mistakes name the key.
  EXPECT_NE(config_error(instant_with_line({{"delay_ns", 0.27}})).find("delay_ns"), std::string::npos);
  EXPECT_NE(config_error(instant_with_line({{"loss_db", -1}})).find("/standards/offset_line/loss_db"), std::string::npos);
  EXPECT_NE(config_error(instant_with_line({{"match_return_loss_db", 3}})).find("/standards/offset_line/match_return_loss_db"),
            std::string::npos);
  EXPECT_NE(config_error(instant_with_line({{"match_phase_deg", 270}})).find("/standards/offset_line/match_phase_deg"),
            std::string::npos);
  EXPECT_NE(config_error(instant_with_line(274)).find("/standards/offset_line"), std::string::npos);
}

using OffsetArm = ControlServiceFixture;

TEST_F(OffsetArm, SwitchPositionPutsTheSocketsUnitBehindTheLine) {
  auto sw = make_switch_instrument(world_, json{{"positions", {{"1", "OPEN"}, {"4", "DUT"}, {"7", "DUT-OFFSET"}}}});
  const std::string serial = lot_.units.at(0).serial;
  ASSERT_TRUE(ask({{"cmd", "connect"}, {"unit", serial}}).value("ok", false));
  EXPECT_FALSE(world_.via_offset_line);
  sw->handle("ROUT:CLOS (@7)");
  EXPECT_EQ(world_.connected_name, serial);
  EXPECT_TRUE(world_.via_offset_line);
  EXPECT_EQ(ask({{"cmd", "status"}})["via"], "offset-line");
  sw->handle("ROUT:CLOS (@1)");                 // a standard sits at the port directly
  EXPECT_EQ(world_.connected_name, "OPEN");
  EXPECT_FALSE(world_.via_offset_line);
  sw->handle("ROUT:CLOS (@7)");                 // the unit it displaced comes back, behind the line
  EXPECT_EQ(world_.connected_name, serial);
  EXPECT_TRUE(world_.via_offset_line);
  sw->handle("ROUT:CLOS (@4)");
  EXPECT_EQ(world_.connected_name, serial);
  EXPECT_FALSE(world_.via_offset_line);
  sw->handle("ROUT:CLOS (@7)");
  sw->handle("ROUT:OPEN (@7)");                 // the throw open: nothing at the port
  EXPECT_EQ(world_.connected_name, "");
  EXPECT_FALSE(world_.via_offset_line);
  EXPECT_EQ(sw->handle("SYST:ERR?").at(0).text, "0,\"No error\"");
  // The positions' message names the new position.
  try {
    make_switch_instrument(world_, json{{"positions", {{"1", "DUT-OFSET"}}}});
    ADD_FAILURE() << "a misspelt position was accepted";
  } catch (const std::invalid_argument& e) {
    EXPECT_NE(std::string(e.what()).find("DUT-OFFSET"), std::string::npos) << e.what();
  }
}

TEST_F(OffsetArm, ControlPortConnectsAUnitViaTheLineAndTruthStaysTheUnits) {
  const std::string serial = lot_.units.at(0).serial;
  const json before = ask({{"cmd", "truth"}, {"unit", serial}, {"frequencies_hz", {915e6}}});
  json r = ask({{"cmd", "connect"}, {"unit", serial}, {"via", "offset-line"}});
  ASSERT_TRUE(r.value("ok", false)) << r.dump();
  EXPECT_EQ(r["via"], "offset-line");
  EXPECT_TRUE(world_.via_offset_line);
  // The World keeps the unit's own DUT; the line is applied where the port is read.
  const std::unique_ptr<Dut> own = make_unit_dut(lot_.units.at(0), lot_.seed);
  EXPECT_EQ(world_.connected->gamma(915e6), own->gamma(915e6));
  EXPECT_EQ(ask({{"cmd", "truth"}, {"unit", serial}, {"frequencies_hz", {915e6}}}), before);
  // Connecting without "via", a standard, or disconnecting takes the line out.
  ASSERT_TRUE(ask({{"cmd", "connect"}, {"unit", serial}}).value("ok", false));
  EXPECT_FALSE(world_.via_offset_line);
  ASSERT_TRUE(ask({{"cmd", "connect"}, {"unit", serial}, {"via", "offset-line"}}).value("ok", false));
  ASSERT_TRUE(ask({{"cmd", "connect"}, {"standard", "LOAD"}}).value("ok", false));
  EXPECT_FALSE(world_.via_offset_line);
  ASSERT_TRUE(ask({{"cmd", "connect"}, {"unit", serial}, {"via", "offset-line"}}).value("ok", false));
  ASSERT_TRUE(ask({{"cmd", "disconnect"}}).value("ok", false));
  EXPECT_FALSE(world_.via_offset_line);
  EXPECT_EQ(ask({{"cmd", "status"}})["via"], "");
  // "via" takes one value and goes only with a unit.
  r = ask({{"cmd", "connect"}, {"unit", serial}, {"via", "offset"}});
  EXPECT_FALSE(r.value("ok", true));
  EXPECT_NE(r.value("error", std::string{}).find("offset-line"), std::string::npos) << r.dump();
  r = ask({{"cmd", "connect"}, {"standard", "OPEN"}, {"via", "offset-line"}});
  EXPECT_FALSE(r.value("ok", true));
  EXPECT_NE(r.value("error", std::string{}).find("unit"), std::string::npos) << r.dump();
}

// The receiver over real SCPI on loopback, the unit on DUT (position 4) and then on DUT-OFFSET
// (7): each reading is the bench model's coupled power of what the port sees (the unit, and the
// unit behind the line), so the pair differs by what the offset model predicts, |E_D + Gamma'|
// changing with the line's half turn, not by the line's loss alone.
TEST(OffsetArmOverScpi, ReceiverReadsTheUnitThroughTheLineAsModelled) {
  json cfg = read_config("config/sim/instant.jsonc");
  cfg["bench"]["directivity_db"] = 20;   // a poor coupler: the leakage term is large
  cfg["instruments"]["receiver"]["settings"]["reading_noise_db"] = 0;
  cfg["instruments"]["source"]["settings"]["level_accuracy_db"] = 0;
  TempDir dir;
  const auto path = write_config(dir, cfg);
  const SimConfig sc = load_sim_config(path);
  const Lot lot = load_lot(repo_file("config/sim/lots/whip915-lot-a.jsonc"));
  const SimUnit* unit = nullptr;
  for (const auto& u : lot.units) {
    if (u.defect.empty()) {
      unit = &u;
      break;
    }
  }
  ASSERT_NE(unit, nullptr);
  const std::unique_ptr<Dut> own = make_unit_dut(*unit, lot.seed);
  const OffsetLineView through(*own, sc.standards.offset_line);

  // The frequency where the model says the arm changes the reading most, both readings kept at
  // least 60 dB above the -110 dBm floor (kTB in 10 kHz + 24 dB NF, computed) so thermal noise
  // moves them by about 0.006 dB (1 sd, computed).
  double f = 0, direct_dbm = 0, offset_dbm = 0;
  for (double fc = 880e6; fc <= 950e6; fc += 5e6) {
    const double d = coupled_power_dbm(sc.bench, *own, fc, -10);
    const double o = coupled_power_dbm(sc.bench, through, fc, -10);
    if (std::min(d, o) < -50) continue;
    if (f == 0 || std::abs(o - d) > std::abs(offset_dbm - direct_dbm)) {
      f = fc;
      direct_dbm = d;
      offset_dbm = o;
    }
  }
  // A matched lossless-connector line would change the reading by its round-trip loss only
  // (2 x 0.08 dB); the half turn against the leakage changes it by far more.
  ASSERT_GT(std::abs(offset_dbm - direct_dbm), 1.0) << "at " << f;

  RunningSim sim({"--config", path.string(), "--log-file", (dir / "sim.log").string()});
  ASSERT_TRUE(sim.ok());
  auto source = sim.session("source/tcp");
  auto receiver = sim.session("receiver/tcp");
  auto sw = sim.session("switch/tcp");
  for (const char* c : {"*RST", "*CLS", "POW -10", "OUTP ON"}) ASSERT_TRUE(source->write(c).ok()) << c;
  for (const char* c : {"*RST", "*CLS", "FREQ:SPAN 200e3", "BAND 10e3", "BAND:VID 10e3", "SWE:POIN 101", "INIT:CONT OFF"}) {
    ASSERT_TRUE(receiver->write(c).ok()) << c;
  }
  ASSERT_TRUE(source->write("FREQ " + scpi::format_number(f)).ok());
  ASSERT_TRUE(receiver->write("FREQ:CENT " + scpi::format_number(f)).ok());
  ASSERT_TRUE(sim.control({{"cmd", "connect"}, {"unit", unit->serial}}).value("ok", false));
  auto read = [&]() -> double {
    EXPECT_TRUE(receiver->write("INIT:IMM").ok());
    EXPECT_TRUE(receiver->wait_complete().ok());
    EXPECT_TRUE(receiver->write("CALC:MARK:MAX").ok());
    auto y = receiver->query_number("CALC:MARK:Y?");
    EXPECT_TRUE(y.ok());
    return y.ok() ? y.value() : 0.0;
  };
  ASSERT_TRUE(sw->write("ROUT:CLOS (@4)").ok());
  const double direct = read();
  ASSERT_TRUE(sw->write("ROUT:CLOS (@7)").ok());
  EXPECT_EQ(sim.control({{"cmd", "status"}})["via"], "offset-line");
  const double offset = read();
  // No reading noise and no source level error in this bench: only thermal noise (above).
  EXPECT_NEAR(direct, direct_dbm, 0.02) << "at " << f;
  EXPECT_NEAR(offset, offset_dbm, 0.02) << "at " << f;
  EXPECT_NEAR(offset - direct, offset_dbm - direct_dbm, 0.03) << "at " << f;
  for (auto* s : {source.get(), receiver.get(), sw.get()}) {
    auto e = s->query("SYST:ERR?");
    ASSERT_TRUE(e.ok());
    EXPECT_EQ(e.value().rfind("0,", 0), 0u) << e.value();
  }
}

}  // namespace
}  // namespace echoline::sim::testing
