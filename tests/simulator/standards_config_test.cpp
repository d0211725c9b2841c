// Non-ideal calibration standards: their reflection, the bench file's "standards" object
// (defaults, limits, unknown keys, the switch's older LOAD key), and the switch and control
// port connecting the configured standards. Also the bench files with poorer couplers load.
#include <cmath>
#include <numbers>

#include <gtest/gtest.h>

#include "drivers/config_error.hpp"
#include "simulator/control_port.hpp"
#include "simulator/instrument.hpp"
#include "simulator/physics/standards.hpp"
#include "simulator/sim_config.hpp"
#include "tests/simulator/control_service_fixture.hpp"

namespace echoline::sim::testing {
namespace {

constexpr double kPi = std::numbers::pi;

double return_loss_db(Complex g) { return -20.0 * std::log10(std::abs(g)); }

// instant.jsonc with `standards` replaced (or removed when null), as text for parse_sim_config.
std::string instant_with(const json& standards, const json& switch_load = nullptr) {
  json cfg = read_config("config/sim/instant.jsonc");
  cfg.erase("lot");
  if (standards.is_null()) cfg.erase("standards");
  else cfg["standards"] = standards;
  if (!switch_load.is_null()) cfg["instruments"]["switch"]["settings"]["load_return_loss_db"] = switch_load;
  return cfg.dump(2);
}

std::string config_error(const std::string& text) { return sim_config_error(text); }

TEST(Standards, ConfiguredOpenShortAndLoadReflectAsConfigured) {
  StandardsParams s;
  s.open_gamma_magnitude = 0.99;
  s.open_capacitance_ff = 50;
  s.short_gamma_magnitude = 0.995;
  s.short_inductance_ph = 100;
  s.load_return_loss_db = 30;
  const double f = 915e6;
  const double w = 2 * kPi * f;
  // OPEN: |Gamma| as set, phase -2 atan(w C Z0) (closed form of (Z - Z0)/(Z + Z0), Z = 1/(jwC))
  EXPECT_NEAR(std::abs(make_open(s)->gamma(f)), 0.99, 1e-12);
  EXPECT_NEAR(std::arg(make_open(s)->gamma(f)), -2 * std::atan(w * 50e-15 * 50), 1e-12);
  // SHORT: |Gamma| as set, phase pi - 2 atan(w L / Z0) (same closed form, Z = jwL)
  EXPECT_NEAR(std::abs(make_short(s)->gamma(f)), 0.995, 1e-12);
  EXPECT_NEAR(std::arg(make_short(s)->gamma(f)), kPi - 2 * std::atan(w * 100e-12 / 50), 1e-12);
  // LOAD: its return loss at 1 GHz
  EXPECT_NEAR(return_loss_db(make_load(s)->gamma(1e9)), 30.0, 1e-9);
  // An ideal open (no capacitance) keeps phase 0
  s.open_capacitance_ff = 0;
  EXPECT_NEAR(std::arg(make_open(s)->gamma(f)), 0.0, 1e-15);
}

TEST(Standards, DefaultsStayCloseToIdeal) {
  const StandardsParams d;
  // 0.998 is 0.017 dB of return loss (20 log10): today's calibration reference moves by that
  EXPECT_NEAR(return_loss_db(make_open(d)->gamma(915e6)), 0.0174, 1e-4);
  EXPECT_NEAR(return_loss_db(make_short(d)->gamma(915e6)), 0.0174, 1e-4);
  EXPECT_NEAR(return_loss_db(make_load(d)->gamma(1e9)), 42.0, 1e-9);
  EXPECT_EQ(d.open_capacitance_ff, 10);
  EXPECT_EQ(d.short_inductance_ph, 10);
}

TEST(Standards, BenchFileStandardsAreReadWithDefaultsAndLimits) {
  const SimConfig none = parse_sim_config(instant_with(nullptr), "sim.jsonc");
  EXPECT_EQ(none.standards.open_gamma_magnitude, 0.998);
  EXPECT_EQ(none.standards.load_return_loss_db, 42);
  const SimConfig some = parse_sim_config(instant_with({{"short_inductance_ph", 25}, {"load_return_loss_db", 36}}), "sim.jsonc");
  EXPECT_EQ(some.standards.short_inductance_ph, 25);
  EXPECT_EQ(some.standards.load_return_loss_db, 36);
  EXPECT_EQ(some.standards.open_capacitance_ff, 10);  // the others keep their defaults
  EXPECT_NE(config_error(instant_with({{"open_gama_magnitude", 0.99}})).find("open_gama_magnitude"), std::string::npos);
  EXPECT_NE(config_error(instant_with({{"open_gamma_magnitude", 1.2}})).find("/standards/open_gamma_magnitude"), std::string::npos);
  EXPECT_NE(config_error(instant_with({{"load_return_loss_db", 2}})).find("/standards/load_return_loss_db"), std::string::npos);
  // the switch's older key: alone it is accepted; both given, they must agree
  EXPECT_EQ(config_error(instant_with(nullptr, 38)), "");
  EXPECT_EQ(config_error(instant_with({{"load_return_loss_db", 38}}, 38)), "");
  EXPECT_NE(config_error(instant_with({{"load_return_loss_db", 40}}, 38)).find("load_return_loss_db"), std::string::npos);
}

TEST(Standards, SwitchAndControlPortConnectTheConfiguredStandards) {
  World world;
  world.standards.open_gamma_magnitude = 0.97;
  world.standards.load_return_loss_db = 33;
  auto sw = make_switch_instrument(world, json{{"positions", {{"1", "OPEN"}, {"2", "SHORT"}, {"3", "LOAD"}}}});
  sw->handle("ROUT:CLOS (@1)");
  ASSERT_NE(world.connected, nullptr);
  EXPECT_NEAR(std::abs(world.connected->gamma(915e6)), 0.97, 1e-12);
  sw->handle("ROUT:CLOS (@3)");
  EXPECT_NEAR(return_loss_db(world.connected->gamma(1e9)), 33.0, 1e-9);

  SimClock clock(*latency_profile("instant"));
  ControlService control(world, nullptr, {}, clock, "instant");
  ASSERT_TRUE(control.handle(R"({"cmd":"connect","standard":"SHORT"})").value("ok", false));
  EXPECT_NEAR(std::abs(world.connected->gamma(915e6)), 0.998, 1e-12);
  ASSERT_TRUE(control.handle(R"({"cmd":"connect","standard":"LOAD"})").value("ok", false));
  EXPECT_NEAR(return_loss_db(world.connected->gamma(1e9)), 33.0, 1e-9);

  // a switch with the older key sets the LOAD for both
  World older;
  auto sw2 = make_switch_instrument(older, json{{"load_return_loss_db", 44}});
  EXPECT_EQ(older.standards.load_return_loss_db, 44);
}

// The mismatch standards: Gamma = magnitude * e^(j phase) * e^(-j 2 w tau) with the bench file's
// true values; by default near, never at, the kit's nominal 0.1 (config/kits/sim-kit.jsonc:
// +-0.002, +-1 degree over the whip sweep). Both the control port and the switch connect them.
TEST(Standards, MismatchStandardsReflectTheirTrueValuesAndConnect) {
  const StandardsParams d;
  const double f = 915e6;
  const Complex a = make_standard("MISMATCH-A", d)->gamma(f);
  EXPECT_NEAR(std::abs(a), 0.1013, 1e-12);
  EXPECT_NEAR(std::arg(a), 0.6 * kPi / 180, 1e-12);
  // B: -0.4 degrees, and 137.5 ps one way lags the round trip by 2 w tau (90.6 degrees here).
  const Complex b = make_standard("MISMATCH-B", d)->gamma(f);
  EXPECT_NEAR(std::abs(b), 0.0989, 1e-12);
  const Complex expected_b = std::polar(0.0989, -0.4 * kPi / 180 - 2 * (2 * kPi * f) * 137.5e-12);
  EXPECT_NEAR(std::abs(b - expected_b), 0, 1e-12);
  for (const MismatchParams& m : {d.mismatch_a, d.mismatch_b}) {
    EXPECT_NE(m.magnitude, 0.1);                    // never the nominal value
    EXPECT_LE(std::abs(m.magnitude - 0.1), 0.002);  // within the kit's tolerance
  }
  // Phase against the kit's nominal (0 degrees, offsets 0 and 137 ps) over 860-970 MHz: within 1 degree.
  for (double fr : {860e6, 915e6, 970e6}) {
    const double wa = std::arg(make_standard("MISMATCH-A", d)->gamma(fr)) * 180 / kPi;
    const double wb = std::arg(make_standard("MISMATCH-B", d)->gamma(fr) * std::polar(1.0, 2 * (2 * kPi * fr) * 137e-12)) * 180 / kPi;
    EXPECT_LT(std::abs(wa), 1.0) << fr;
    EXPECT_LT(std::abs(wb), 1.0) << fr;
    EXPECT_GT(std::abs(wb), 0.1) << fr;
  }
  EXPECT_EQ(make_standard("MISMATCH-C", d), nullptr);

  // The bench file's "standards" sets the true values; mistakes name the key.
  const SimConfig some = parse_sim_config(
      instant_with({{"mismatch_b", {{"magnitude", 0.33}, {"phase_deg", 180}, {"offset_delay_ps", 50}}}}), "sim.jsonc");
  EXPECT_EQ(some.standards.mismatch_b.magnitude, 0.33);
  EXPECT_EQ(some.standards.mismatch_b.phase_deg, 180);
  EXPECT_EQ(some.standards.mismatch_a.magnitude, 0.1013);   // the other keeps its default
  EXPECT_NE(config_error(instant_with({{"mismatch_a", {{"magnitud", 0.1}}}})).find("magnitud"), std::string::npos);
  EXPECT_NE(config_error(instant_with({{"mismatch_a", {{"magnitude", 1.5}}}})).find("/standards/mismatch_a/magnitude"),
            std::string::npos);
  const SimConfig shipped = load_sim_config(repo_file("config/sim/instant.jsonc"));
  EXPECT_EQ(shipped.standards.mismatch_b.offset_delay_ps, 137.5);

  World world;
  world.standards.mismatch_a.magnitude = 0.2;
  SimClock clock(*latency_profile("instant"));
  ControlService control(world, nullptr, {}, clock, "instant");
  json r = control.handle(R"({"cmd":"connect","standard":"MISMATCH-A"})");
  ASSERT_TRUE(r.value("ok", false)) << r.dump();
  EXPECT_EQ(world.connected_name, "MISMATCH-A");
  EXPECT_NEAR(std::abs(world.connected->gamma(f)), 0.2, 1e-12);
  r = control.handle(R"({"cmd":"connect","standard":"MISMATCH-C"})");
  EXPECT_FALSE(r.value("ok", true));
  EXPECT_NE(r.dump().find("MISMATCH-B"), std::string::npos) << r.dump();   // the message lists the names

  // The switch's default positions 5 and 6 are the mismatch standards; a position can name them.
  auto sw = make_switch_instrument(world, json::object());
  sw->handle("ROUT:CLOS (@6)");
  EXPECT_EQ(world.connected_name, "MISMATCH-B");
  EXPECT_NEAR(std::abs(world.connected->gamma(f)), 0.0989, 1e-12);
  auto sw2 = make_switch_instrument(world, json{{"positions", {{"1", "MISMATCH-A"}, {"2", "DUT"}}}});
  sw2->handle("ROUT:CLOS (@1)");
  EXPECT_NEAR(std::abs(world.connected->gamma(f)), 0.2, 1e-12);
  EXPECT_THROW(make_switch_instrument(world, json{{"positions", {{"1", "MISMATCH-Z"}}}}), std::invalid_argument);
}

TEST(PoorCouplers, TwentyFiveDecibelBenchLoadsAndTwentyIsAccepted) {
  const SimConfig d25 = load_sim_config(repo_file("config/sim/instant-d25.jsonc"));
  EXPECT_EQ(d25.bench.directivity_db, 25);
  EXPECT_TRUE(d25.latency.instant);
  const SimConfig d35 = load_sim_config(repo_file("config/sim/instant.jsonc"));
  EXPECT_EQ(d35.bench.directivity_db, 35);
  for (const auto* c : {&d25, &d35}) {
    for (const auto& inst : c->instruments) {
      if (inst.role == "receiver") {
        EXPECT_EQ(inst.settings.value("reading_noise_db", -1.0), 0.05);
      }
    }
  }
  json cfg = read_config("config/sim/instant.jsonc");
  cfg.erase("lot");
  cfg["bench"]["directivity_db"] = 20;
  EXPECT_EQ(parse_sim_config(cfg.dump(), "sim.jsonc").bench.directivity_db, 20);
}

TEST(PoorCouplers, SimulatorServesTheWireLotOnTheTwentyFiveDecibelBench) {
  TempDir dir;
  RunningSim sim({"--config", repo_file("config/sim/instant-d25.jsonc").string(), "--lot",
                  repo_file("config/sim/lots/whip915-wire-600.jsonc").string(), "--log-file", (dir / "sim.log").string()});
  ASSERT_TRUE(sim.ok());
  json units = sim.control({{"cmd", "units"}});
  ASSERT_TRUE(units.value("ok", false)) << units.dump();
  EXPECT_EQ(units["units"].size(), 600u);
  json t = sim.control({{"cmd", "truth"}, {"unit", "WH915W-0001"}, {"frequencies_hz", {902e6, 915e6, 928e6}}});
  ASSERT_TRUE(t.value("ok", false)) << t.dump();
  EXPECT_EQ(t["model"], "wire-monopole");
  EXPECT_EQ(t["nominal_length_mm"], 78.0);
  ASSERT_TRUE(t["f0_hz"].is_number());
  ASSERT_TRUE(t["depth_db"].is_number());
  // depth_db is the true RL at f0, and no frequency asked for beats it
  for (const auto& rl : t["return_loss_db"]) EXPECT_LE(rl.get<double>(), t["depth_db"].get<double>() + 1e-9);
  EXPECT_EQ(sim.process().terminate(), 0);
}

}  // namespace
}  // namespace echoline::sim::testing
