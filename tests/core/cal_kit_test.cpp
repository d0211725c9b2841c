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
