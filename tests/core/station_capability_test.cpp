// core::station_capability: fixture figures and profile limits carried over, noise floor from kTB.
#include <gtest/gtest.h>

#include "daemon/core/station_capability.hpp"

namespace echoline::core {
namespace {

TEST(StationCapability, CarriesFixtureAndProfileFiguresAndComputesTheNoiseFloor) {
  drivers::FixtureConfig fx;
  fx.nominal_directivity_db = 35;
  fx.source_match_db = 25;
  fx.coupling_db = 20;
  fx.mainline_loss_db = 0.5;
  fx.cable_loss_db = 0.3;
  drivers::Profile src;
  src.min_frequency_hz = 9e3;
  src.max_frequency_hz = 6e9;
  src.max_power_dbm = 20;
  drivers::Profile rcv;
  rcv.min_frequency_hz = 100e3;
  rcv.max_frequency_hz = 3e9;
  rcv.max_safe_input_dbm = 30;
  rcv.noise_figure_db = 24;
  Recipe recipe;
  recipe.receiver.rbw_hz = 10e3;

  const StationCapability c = station_capability(fx, src, rcv, recipe);
  EXPECT_EQ(c.directivity_db, 35);
  EXPECT_EQ(c.source_match_db, 25);
  EXPECT_EQ(c.coupling_db, 20);
  EXPECT_EQ(c.mainline_loss_db, 0.5);
  EXPECT_EQ(c.cable_loss_db, 0.3);
  EXPECT_EQ(c.source_min_hz, 9e3);
  EXPECT_EQ(c.source_max_hz, 6e9);
  EXPECT_EQ(c.source_max_power_dbm, 20);
  EXPECT_EQ(c.receiver_min_hz, 100e3);
  EXPECT_EQ(c.receiver_max_hz, 3e9);
  EXPECT_EQ(c.receiver_max_safe_input_dbm, 30);
  // kTB at 290 K = -173.98 dBm/Hz (k = 1.380649e-23 J/K, SI 2019 exact), +40 dB for 10 kHz,
  // +24 dB noise figure: -109.98 dBm; the station rounds kTB to the trade's -174 (rf_math.cpp),
  // 0.02 dB pessimistic.
  EXPECT_NEAR(c.noise_floor_dbm, -109.98, 0.03);

  // 10 dB of input attenuation raises the floor referred to the input by 10 dB (common practice,
  // from memory); fast capture measures with its own RBW: 300 kHz is +14.77 dB over 10 kHz.
  recipe.receiver.attenuation_db = 10;
  EXPECT_NEAR(station_capability(fx, src, rcv, recipe).noise_floor_dbm, -99.98, 0.03);
  recipe.mode = SweepMode::fast_capture;
  recipe.fast_capture.rbw_hz = 300e3;
  EXPECT_NEAR(station_capability(fx, src, rcv, recipe).noise_floor_dbm, -99.98 + 14.77, 0.03);
}

}  // namespace
}  // namespace echoline::core
