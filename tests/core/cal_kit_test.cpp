// Calibration-kit files and models (daemon/core/cal_kit*.hpp).
#include "daemon/core/cal_kit.hpp"

#include <cmath>
#include <numbers>

#include <gtest/gtest.h>

#include "daemon/core/cal_kit_loader.hpp"
#include "drivers/config_error.hpp"
#include "tests/support/process.hpp"

namespace echoline::core {
namespace {

TEST(CalKit, ShippedKitsLoad) {
  const CalKit sim = load_cal_kit(echoline::testing::source_dir() / "config/kits/sim-kit.jsonc");
  EXPECT_EQ(sim.identity, "Echoline SIM-KIT-N");
  EXPECT_EQ(sim.serial, "SIMKIT-0001");
  EXPECT_DOUBLE_EQ(sim.open.fringe_capacitance_f, 10e-15);
  EXPECT_NEAR(load_gamma_bound(sim, 915e6), std::pow(10.0, -40.0 / 20), 1e-12);
  EXPECT_NEAR(load_gamma_bound(sim, 3e9), std::pow(10.0, -37.0 / 20), 1e-12);
  EXPECT_EQ(load_gamma_bound(sim, 7e9), 1.0);   // beyond the kit's data nothing is known
  EXPECT_NEAR(sim.connection_repeatability, 1e-3, 1e-12);
  const CalKit generic = load_cal_kit(echoline::testing::source_dir() / "config/kits/generic-conservative.jsonc");
  const CalKit builtin = builtin_conservative_kit();
  EXPECT_DOUBLE_EQ(generic.open.min_magnitude, builtin.open.min_magnitude);
  EXPECT_NEAR(load_gamma_bound(generic, 1e9), load_gamma_bound(builtin, 1e9), 1e-12);
  EXPECT_NEAR(generic.connection_repeatability, builtin.connection_repeatability, 1e-5);
  // Only the simulator's kit has mismatch standards; the conservative kits have none.
  ASSERT_EQ(sim.mismatch.size(), 2u);
  EXPECT_EQ(sim.mismatch[0].name, "MISMATCH-A");
  EXPECT_EQ(sim.mismatch[1].name, "MISMATCH-B");
  EXPECT_DOUBLE_EQ(sim.mismatch[0].magnitude, 0.1);
  EXPECT_DOUBLE_EQ(sim.mismatch[0].magnitude_tolerance, 0.002);
  EXPECT_NEAR(sim.mismatch[0].phase_tolerance_rad, std::numbers::pi / 180, 1e-15);
  EXPECT_DOUBLE_EQ(sim.mismatch[0].offset_delay_s, 0);
  EXPECT_NEAR(sim.mismatch[1].offset_delay_s, 137e-12, 1e-24);
  EXPECT_EQ(find_mismatch(sim, "MISMATCH-B"), &sim.mismatch[1]);
  EXPECT_EQ(find_mismatch(sim, "OPEN"), nullptr);
  EXPECT_TRUE(generic.mismatch.empty());
  EXPECT_TRUE(builtin.mismatch.empty());
  // Only the simulator's kit has an offset line (its switch has the DUT-OFFSET arm).
  ASSERT_TRUE(sim.offset_line.has_value());
  EXPECT_NEAR(sim.offset_line->delay_s, 273.2e-12, 1e-18);
  EXPECT_FALSE(generic.offset_line.has_value());
  EXPECT_FALSE(builtin.offset_line.has_value());
}

std::string error_of(const std::string& text) {
  try {
    parse_cal_kit(text, "kit.jsonc");
  } catch (const drivers::ConfigError& e) {
    return e.what();
  }
  return "";
}

TEST(CalKit, MistakesNameFileLineAndKey) {
  const std::string ok = R"({
  "identity": "k", "serial": "1",
  "open": {"min_magnitude": 0.99},
  "short": {"min_magnitude": 0.99},
  "load": {"worst_return_loss": [{"up_to_hz": "3 GHz", "return_loss_db": 30}]}
})";
  EXPECT_EQ(error_of(ok), "");
  std::string typo = ok;
  typo.replace(typo.find("\"min_magnitude\": 0.99}"), 14, "\"min_magnitdue\"");
  const std::string e = error_of(typo);
  EXPECT_NE(e.find("kit.jsonc:3"), std::string::npos) << e;
  EXPECT_NE(e.find("min_magnitdue"), std::string::npos) << e;
  std::string bad_serial = ok;
  bad_serial.replace(bad_serial.find("\"serial\": \"1\""), 13, "\"serial\": \"\"");
  EXPECT_NE(error_of(bad_serial).find("/serial"), std::string::npos);
  std::string descending = ok;
  descending.replace(descending.find("[{"), 2, "[{\"up_to_hz\": \"4 GHz\", \"return_loss_db\": 30}, {");
  EXPECT_NE(error_of(descending).find("ascending"), std::string::npos) << error_of(descending);
}

// A kit with a "mismatch" list: each mistake names the file, line and key path.
TEST(CalKit, MismatchMistakesNameFileLineAndKey) {
  auto kit = [](const std::string& mismatch) {
    return R"({
  "identity": "k", "serial": "1",
  "open": {"min_magnitude": 0.99},
  "short": {"min_magnitude": 0.99},
  "load": {"worst_return_loss": [{"up_to_hz": "3 GHz", "return_loss_db": 30}]},
  "mismatch": [
)" + mismatch + "\n]\n}";
  };
  const std::string a = R"({"name": "MISMATCH-A", "magnitude": 0.1, "magnitude_tolerance": 0.002})";
  const std::string b = R"({"name": "MISMATCH-B", "magnitude": 0.1, "offset_delay_ps": 137, "phase_tolerance_deg": 1})";
  EXPECT_EQ(error_of(kit(a + ",\n" + b)), "");
  const CalKit k = parse_cal_kit(kit(a + ",\n" + b), "kit.jsonc");
  ASSERT_EQ(k.mismatch.size(), 2u);
  EXPECT_EQ(k.mismatch[1].phase_rad, 0);   // phase_deg left out: 0 (a resistance above Z0)

  const std::string big = error_of(kit(R"({"name": "MISMATCH-A", "magnitude": 0.6})"));
  EXPECT_NE(big.find("kit.jsonc:7"), std::string::npos) << big;
  EXPECT_NE(big.find("/mismatch/0/magnitude"), std::string::npos) << big;
  EXPECT_NE(error_of(kit(R"({"name": "MISMATCH-A", "magnitude": 0})")).find("/mismatch/0/magnitude"), std::string::npos);
  const std::string tol = error_of(kit(R"({"name": "MISMATCH-A", "magnitude": 0.1, "magnitude_tolerance": -0.001})"));
  EXPECT_NE(tol.find("/mismatch/0/magnitude_tolerance"), std::string::npos) << tol;
  const std::string twice = error_of(kit(a + ",\n" + a));
  EXPECT_NE(twice.find("kit.jsonc:8"), std::string::npos) << twice;
  EXPECT_NE(twice.find("/mismatch/1/name"), std::string::npos) << twice;
  EXPECT_NE(twice.find("named twice"), std::string::npos) << twice;
  const std::string lower = error_of(kit(R"({"name": "mismatch a", "magnitude": 0.1})"));
  EXPECT_NE(lower.find("/mismatch/0/name"), std::string::npos) << lower;
  EXPECT_NE(error_of(kit(R"({"name": "LOAD", "magnitude": 0.1})")).find("already the name"), std::string::npos);
  const std::string typo = error_of(kit(R"({"name": "MISMATCH-A", "magnitude": 0.1, "ofset_delay_ps": 137})"));
  EXPECT_NE(typo.find("ofset_delay_ps"), std::string::npos) << typo;
  EXPECT_NE(error_of(kit(R"({"magnitude": 0.1})")).find("/mismatch/0/name"), std::string::npos);
}

// A kit with an "offset_line": every figure is required, each mistake names file, line and key.
// A quarter wave at 915 MHz is c/(4f) = 81.9 mm in air, 273.2 ps one way (c = 299 792 458 m/s,
// SI definition); 39 dB return loss is |Γ| = 10^(−39/20) = 0.0112 (definition, common practice).
TEST(CalKit, OffsetLineIsReadWithEveryFigureRequired) {
  auto kit = [](const std::string& line) {
    return R"({
  "identity": "k", "serial": "1",
  "open": {"min_magnitude": 0.99},
  "short": {"min_magnitude": 0.99},
  "load": {"worst_return_loss": [{"up_to_hz": "3 GHz", "return_loss_db": 30}]},
  "offset_line":
)" + line + "\n}";
  };
  const std::string ok = R"({"delay_ps": 273.2, "delay_tolerance_ps": 2, "loss_db": 0.08, "loss_tolerance_db": 0.04, "match_return_loss_db": 39})";
  EXPECT_EQ(error_of(kit(ok)), "");
  const CalKit k = parse_cal_kit(kit(ok), "kit.jsonc");
  ASSERT_TRUE(k.offset_line.has_value());
  EXPECT_NEAR(k.offset_line->delay_s, 273.2e-12, 1e-18);
  EXPECT_NEAR(k.offset_line->delay_tolerance_s, 2e-12, 1e-18);
  EXPECT_NEAR(k.offset_line->loss_db, 0.08, 1e-12);
  EXPECT_NEAR(k.offset_line->match, 0.01122, 1e-5);
  EXPECT_NEAR(1.0 / (4 * 915e6), 273.2e-12, 0.05e-12);
  std::string missing = ok;
  missing.replace(missing.find(R"("loss_tolerance_db": 0.04, )"), 27, "");
  const std::string m = error_of(kit(missing));
  EXPECT_NE(m.find("kit.jsonc:"), std::string::npos) << m;
  EXPECT_NE(m.find("/offset_line/loss_tolerance_db"), std::string::npos) << m;
  EXPECT_NE(m.find("required"), std::string::npos) << m;
  std::string poor = ok;
  poor.replace(poor.find("39"), 2, "6");
  EXPECT_NE(error_of(kit(poor)).find("/offset_line/match_return_loss_db"), std::string::npos) << error_of(kit(poor));
  std::string typo = ok;
  typo.replace(typo.find("delay_ps"), 8, "dealy_ps");
  EXPECT_NE(error_of(kit(typo)).find("dealy_ps"), std::string::npos) << error_of(kit(typo));
  // No "offset_line": the kit has none.
  const std::string plain = R"({"identity": "k", "serial": "1", "open": {}, "short": {},
    "load": {"worst_return_loss": [{"up_to_hz": "3 GHz", "return_loss_db": 30}]}})";
  EXPECT_FALSE(parse_cal_kit(plain, "kit.jsonc").offset_line.has_value());
}

// A 61.1 ohm termination: |Γ| = (61.1 − 50)/(61.1 + 50) = 0.0999, and 40.9 ohm the same at 180°
// (definition of Γ, common practice, no source). An eighth wave at 915 MHz in air is
// λ/8 = c/(8f) = 40.96 mm, 136.6 ps one way (c = 299 792 458 m/s, SI definition); its round trip
// turns Γ by 2·ω·τ = 90°.
TEST(CalKit, MismatchModel) {
  EXPECT_NEAR((61.1 - 50) / (61.1 + 50), 0.1, 1e-3);
  EXPECT_NEAR((40.9 - 50) / (40.9 + 50), -0.1, 1e-3);
  MismatchStandard a;
  a.name = "MISMATCH-A";
  a.magnitude = 0.1;
  EXPECT_NEAR(std::abs(mismatch_gamma(a, 915e6) - std::complex<double>(0.1, 0)), 0, 1e-15);
  EXPECT_EQ(describe_mismatch(a), "61.1 ohm termination, no offset");
  MismatchStandard low = a;
  low.phase_rad = std::numbers::pi;
  EXPECT_NEAR(std::real(mismatch_gamma(low, 915e6)), -0.1, 1e-15);
  EXPECT_EQ(describe_mismatch(low), "40.9 ohm termination, no offset");

  const double c = 299792458.0;
  const double eighth_wave_m = c / 915e6 / 8;
  EXPECT_NEAR(eighth_wave_m * 1e3, 40.96, 0.01);
  MismatchStandard b = a;
  b.offset_delay_s = eighth_wave_m / c;   // 136.6 ps
  EXPECT_NEAR(b.offset_delay_s * 1e12, 136.6, 0.05);
  const double turn_deg = std::arg(mismatch_gamma(b, 915e6) / mismatch_gamma(a, 915e6)) * 180 / std::numbers::pi;
  EXPECT_NEAR(turn_deg, -90.0, 1e-9);                  // behind: the phase lags
  EXPECT_NEAR(std::abs(mismatch_gamma(b, 915e6)), 0.1, 1e-15);
  // The kit's 137 ps: 90.3° at 915 MHz, and between 84.8° and 95.7° over the 860-970 MHz sweep.
  b.offset_delay_s = 137e-12;
  auto turn = [&](double f) { return -std::arg(mismatch_gamma(b, f) / mismatch_gamma(a, f)) * 180 / std::numbers::pi; };
  EXPECT_NEAR(turn(915e6), 90.26, 0.01);
  EXPECT_NEAR(turn(860e6), 84.83, 0.01);
  EXPECT_NEAR(turn(970e6), 95.68, 0.01);
  EXPECT_EQ(describe_mismatch(b), "61.1 ohm termination, 137 ps offset");
}

// An ideal open is Γ = 1 and an ideal short Γ = −1 (definition). A 10 fF fringe at 1 GHz turns
// the OPEN by −2·atan(ωCZ0) = −0.18° (ωCZ0 = 3.14e-3); a 10 pH short by +0.07°: common practice.
TEST(CalKit, StandardModels) {
  ReflectStandard ideal;
  EXPECT_NEAR(std::abs(open_gamma(ideal, 1e9) - std::complex<double>(1, 0)), 0, 1e-12);
  EXPECT_NEAR(std::abs(short_gamma(ideal, 1e9) - std::complex<double>(-1, 0)), 0, 1e-12);
  ReflectStandard open;
  open.fringe_capacitance_f = 10e-15;
  const double w = 2 * std::numbers::pi * 1e9;
  EXPECT_NEAR(std::arg(open_gamma(open, 1e9)), -2 * std::atan(w * 10e-15 * 50), 1e-12);
  EXPECT_NEAR(std::abs(open_gamma(open, 1e9)), 1.0, 1e-12);
  ReflectStandard offset;
  offset.offset_delay_s = 50e-12;   // half a turn round trip at 5 GHz: Γ = −1 for an open
  EXPECT_NEAR(std::real(open_gamma(offset, 5e9)), -1.0, 1e-9);
}

}  // namespace
}  // namespace echoline::core
