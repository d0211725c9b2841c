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
  // from memory); fast capture measures with the RBW it plans. The LOAD is expected at
  // -10 - 20 - 0.5 - 2 x 0.3 - 35 = -66.1 dBm; with a 15 dB margin 1 MHz (floor -80 dBm, 13.9 dB
  // under) is refused and 300 kHz (+14.77 dB over 10 kHz: -85.2 dBm) taken.
  recipe.receiver.attenuation_db = 10;
  EXPECT_NEAR(station_capability(fx, src, rcv, recipe).noise_floor_dbm, -99.98, 0.03);
  recipe.mode = SweepMode::fast_capture;
  recipe.segments.push_back(Segment{860e6, 970e6, 221});
  recipe.source.power_dbm = -10;
  recipe.fast_capture.min_load_margin_db = 15;
  const StationCapability fast = station_capability(fx, src, rcv, recipe);
  EXPECT_EQ(fast.fast_capture_problem, "");
  EXPECT_NEAR(fast.noise_floor_dbm, -99.98 + 14.77, 0.03);
  // A limit no plan meets is carried for recipe check to report.
  recipe.fast_capture.max_capture_s = 0.01;
  EXPECT_NE(station_capability(fx, src, rcv, recipe).fast_capture_problem.find("max_capture_s"), std::string::npos);
}

TEST(StationCapability, FastCaptureInstrumentsComeFromTheProfiles) {
  drivers::Profile src, rcv;
  rcv.noise_figure_db = 22;
  // No "sweep" sections: the generic figures, RBW in the 1-3 series from 10 Hz to 3 MHz.
  FastCaptureInstruments generic = fast_capture_instruments(src, rcv);
  EXPECT_EQ(generic.rbw_steps_hz.front(), 10);
  EXPECT_EQ(generic.rbw_steps_hz.back(), 3e6);
  EXPECT_EQ(generic.noise_figure_db, 22);
  src.sweep.min_time_s = 0.002;
  src.sweep.max_time_s = 50;
  src.sweep.retrace_s = 0.001;
  rcv.sweep.min_time_s = 1e-4;
  rcv.sweep.max_time_s = 100;
  rcv.sweep.rearm_s = 0.004;
  rcv.sweep.max_points = 601;
  rcv.sweep.rbw_steps_hz = {1e3, 1e6};
  FastCaptureInstruments in = fast_capture_instruments(src, rcv);
  EXPECT_EQ(in.source_min_sweep_s, 0.002);
  EXPECT_EQ(in.source_max_sweep_s, 50);
  EXPECT_EQ(in.source_retrace_s, 0.001);
  EXPECT_EQ(in.receiver_min_sweep_s, 1e-4);
  EXPECT_EQ(in.receiver_max_sweep_s, 100);
  EXPECT_EQ(in.receiver_rearm_s, 0.004);
  EXPECT_EQ(in.receiver_max_points, 601);
  EXPECT_EQ(in.rbw_steps_hz, (std::vector<double>{1e3, 1e6}));
}

}  // namespace
}  // namespace echoline::core
