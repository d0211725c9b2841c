// core::station_capability: fixture figures and profile limits carried over, noise floor from kTB.
#include <gtest/gtest.h>

#include "daemon/core/recipe_loader.hpp"
#include "daemon/core/station_capability.hpp"
#include "tests/support/process.hpp"

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

// The offset pair without a switch arm through the line: the operator fits the line for each
// unit, its connection is made anew each time, and its repeatability at the coverage factor
// joins the line's match (MEASUREMENT.md §12; a bound of a sum of two reflections is the sum of
// their bounds, the triangle inequality). With the arm the kit's figure stands.
TEST(StationCapability, AnOffsetLineFittedByHandCarriesItsConnection) {
  drivers::FixtureConfig fx;
  drivers::Profile src, rcv;
  Recipe recipe;
  recipe.offset_pair = true;
  recipe.coverage_factor = 3;
  CalKit kit;
  kit.connection_repeatability = 0.001;   // 60 dB
  kit.offset_line = OffsetLine{273.2e-12, 2e-12, 0.08, 0.04, 0.0112};
  const StationCapability hand = station_capability(fx, src, rcv, recipe, &kit);
  EXPECT_TRUE(hand.offset_line_by_hand);
  EXPECT_DOUBLE_EQ(hand.kit_line_match, 0.0112);
  EXPECT_NEAR(hand.kit.offset_line->match, 0.0142, 1e-12);
  drivers::Profile sw;
  sw.positions = {{"OPEN", "1"}, {"SHORT", "2"}, {"LOAD", "3"}, {"DUT", "4"}, {"DUT-OFFSET", "5"}};
  const StationCapability switched = station_capability(fx, src, rcv, recipe, &kit, &sw);
  EXPECT_FALSE(switched.offset_line_by_hand);
  EXPECT_DOUBLE_EQ(switched.kit.offset_line->match, 0.0112);
  recipe.offset_pair = false;
  EXPECT_FALSE(station_capability(fx, src, rcv, recipe, &kit).offset_line_by_hand);
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

// The start-pulse cable is used only when every piece is there: the fixture says the cable is
// in, the source profile gives its pulse's timing, the receiver's its trigger figures and the
// three trigger operations. Then the plan is triggered and its offset bound is b/T x the summed
// spread (MEASUREMENT.md §11); otherwise the station says why and plans free-running.
TEST(StationCapability, StartPulseCableNeedsEveryPiece) {
  const auto dir = echoline::testing::source_dir() / "config/instruments";
  const drivers::Profile src = drivers::load_profile(dir / "sim-source.jsonc");
  const drivers::Profile rcv = drivers::load_profile(dir / "sim-receiver.jsonc");
  const Recipe recipe = load_recipe(echoline::testing::source_dir() / "config/recipes/whip915-fast.jsonc");
  drivers::FixtureConfig fx;
  EXPECT_EQ(start_pulse_problem(fx, src, rcv), "");   // no cable, nothing to say
  auto free_running = plan_fast_capture(recipe, fx, src, rcv);
  ASSERT_TRUE(free_running.ok()) << free_running.error().message;
  EXPECT_FALSE(free_running->triggered);
  fx.start_pulse_cable = true;
  EXPECT_EQ(start_pulse_problem(fx, src, rcv), "");
  auto cabled = plan_fast_capture(recipe, fx, src, rcv);
  ASSERT_TRUE(cabled.ok()) << cabled.error().message;
  EXPECT_TRUE(cabled->triggered);
  // Bin 0.5 MHz, ramp 1 ms, spread 20 ns (receiver) + 0 (source): 0.5e9 Hz/s x 20e-9 s = 10 Hz;
  // 1 ppm on each timebase: 222 Hz of slide at the last bin and 0.50 Hz from the delay
  // (fast_capture_plan_test.cpp works these by hand): 232.50 Hz.
  EXPECT_NEAR(cabled->frequency_offset_hz, 232.50, 0.01);
  const StationCapability c = station_capability(fx, src, rcv, recipe);
  EXPECT_NEAR(c.frequency_offset_hz, 232.50, 0.01);
  EXPECT_EQ(c.start_pulse_problem, "");

  drivers::Profile no_ops = rcv;
  no_ops.commands.erase("set_trigger_delay");
  const std::string why = start_pulse_problem(fx, src, no_ops);
  EXPECT_NE(why.find("set_trigger_delay"), std::string::npos) << why;
  drivers::Profile no_accuracy = rcv;
  no_accuracy.sweep.time_accuracy_ppm = -1;
  EXPECT_NE(start_pulse_problem(fx, src, no_accuracy).find("time_accuracy_ppm"), std::string::npos);
  drivers::Profile no_pulse = src;
  no_pulse.sweep.start_pulse_uncertainty_s = -1;
  EXPECT_NE(start_pulse_problem(fx, no_pulse, rcv).find("start_pulse_uncertainty_s"), std::string::npos);
  auto fallback = plan_fast_capture(recipe, fx, no_pulse, rcv);
  ASSERT_TRUE(fallback.ok());
  EXPECT_FALSE(fallback->triggered);
  EXPECT_NEAR(fallback->frequency_offset_hz, 0.25e6, 1e-3);
  const StationCapability w = station_capability(fx, no_pulse, rcv, recipe);
  EXPECT_NE(w.start_pulse_problem.find("runs untriggered"), std::string::npos) << w.start_pulse_problem;
}

}  // namespace
}  // namespace echoline::core
