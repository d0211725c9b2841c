// Recipe files in fast-capture mode: "mode" and the "fast_capture" block load with their
// automatic values, each mistake names file, line and key path, the timing rules of
// fast_capture_plan.hpp are enforced, and the trace maps onto the plan's points.
#include <cmath>
#include <string>

#include <gtest/gtest.h>

#include "daemon/core/fast_capture_plan.hpp"
#include "daemon/core/recipe_loader.hpp"
#include "drivers/config_error.hpp"
#include "tests/support/process.hpp"

namespace echoline::core {
namespace {

// 860-970 MHz in 201 points (0.55 MHz apart), as the shipped whip recipes.
const std::string kFast = R"({
  "name": "t",
  "version": "1",
  "mode": "fast-capture",
  "segments": [
    { "start_hz": "860 MHz", "stop_hz": "970 MHz", "points": 201 }
  ],
  "source": { "power_dbm": -10 },
  "receiver": { "rbw_hz": "10 kHz", "span_hz": "100 kHz" },
  "fast_capture": {
    "rbw_hz": "300 kHz",
    "source_sweep_time_s": 0.005,
    "receiver_sweep_time_s": 2.0,
    "receiver_sweeps": 1
  },
  "rule": "guarded",
  "limits": {
    "mask": [ { "start_hz": "902 MHz", "stop_hz": "928 MHz", "min_return_loss_db": 10 } ]
  }
})";

std::string replace(std::string text, const std::string& from, const std::string& to) {
  auto at = text.find(from);
  EXPECT_NE(at, std::string::npos) << from;
  if (at != std::string::npos) text.replace(at, from.size(), to);
  return text;
}

int line_of(const std::string& text, const std::string& needle) {
  auto at = text.find(needle);
  EXPECT_NE(at, std::string::npos) << needle;
  int line = 1;
  for (std::size_t i = 0; i < at && i < text.size(); ++i) line += text[i] == '\n';
  return line;
}

void expect_error(const std::string& text, const std::string& key, const std::string& line_marker,
                  const std::string& message_part) {
  try {
    parse_recipe(text, "fast.jsonc");
    ADD_FAILURE() << "no error for: " << message_part;
  } catch (const drivers::ConfigError& err) {
    EXPECT_EQ(err.file, "fast.jsonc");
    EXPECT_EQ(err.key, key) << err.what();
    EXPECT_EQ(err.line, line_of(text, line_marker)) << err.what();
    EXPECT_NE(std::string(err.what()).find(message_part), std::string::npos) << err.what();
  }
}

TEST(RecipeLoaderFast, FastCaptureBlockLoads) {
  Recipe r = parse_recipe(kFast, "ok.jsonc");
  EXPECT_EQ(r.mode, SweepMode::fast_capture);
  EXPECT_DOUBLE_EQ(r.fast_capture.rbw_hz, 300e3);
  EXPECT_DOUBLE_EQ(r.fast_capture.source_sweep_time_s, 0.005);
  EXPECT_DOUBLE_EQ(r.fast_capture.receiver_sweep_time_s, 2.0);
  EXPECT_EQ(r.fast_capture.receiver_sweeps, 1);
}

TEST(RecipeLoaderFast, ShippedFastRecipeLoads) {
  Recipe r = load_recipe(echoline::testing::source_dir() / "config/recipes/whip915-fast.jsonc");
  EXPECT_EQ(r.mode, SweepMode::fast_capture);
  auto plan = plan_fast_capture(r);
  ASSERT_TRUE(plan.ok()) << plan.error().message;
  EXPECT_TRUE(plan->axis.bins_on_plan);
  EXPECT_EQ(plan->axis.points, 221);
}

TEST(RecipeLoaderFast, AutomaticTimesFollowTheRules) {
  std::string text = replace(kFast, R"("source_sweep_time_s": 0.005,
    "receiver_sweep_time_s": 2.0,
)", "");
  Recipe r = parse_recipe(text, "ok.jsonc");
  auto p = plan_fast_capture(r);
  ASSERT_TRUE(p.ok()) << p.error().message;
  // Band = 110 MHz + one bin (half a bin beyond each end) = 110.55 MHz.
  EXPECT_NEAR(p->source_start_hz, 860e6 - 0.275e6, 1e-3);
  EXPECT_NEAR(p->source_stop_hz, 970e6 + 0.275e6, 1e-3);
  // Rule 1: k * band / RBW^2, k = 2.5 (common-practice sweep-time rule, from memory) = 3.07 ms.
  EXPECT_NEAR(p->source_sweep_s, 2.5 * 110.55e6 / (300e3 * 300e3), 1e-12);
  // Rule 2 with the margin of 2: 2 x 200 x ramp.
  EXPECT_NEAR(p->receiver_sweep_s, 2 * 200 * p->source_sweep_s, 1e-12);
}

TEST(RecipeLoaderFast, ModeWithoutBlockTakesDefaults) {
  std::string text = replace(kFast, R"("fast_capture": {
    "rbw_hz": "300 kHz",
    "source_sweep_time_s": 0.005,
    "receiver_sweep_time_s": 2.0,
    "receiver_sweeps": 1
  },
)", "");
  Recipe r = parse_recipe(text, "ok.jsonc");
  EXPECT_EQ(r.mode, SweepMode::fast_capture);
  EXPECT_DOUBLE_EQ(r.fast_capture.rbw_hz, 300e3);
  EXPECT_EQ(r.fast_capture.source_sweep_time_s, 0);   // automatic
}

TEST(RecipeLoaderFast, UnknownModeIsNamed) {
  expect_error(replace(kFast, R"("mode": "fast-capture")", R"("mode": "swept")"), "/mode", R"("mode")", "swept");
}

TEST(RecipeLoaderFast, UnknownKeyInBlockIsNamed) {
  expect_error(replace(kFast, R"("receiver_sweeps": 1)", R"("receiver_sweeps": 1, "dwell": 3)"), "/fast_capture/dwell",
               R"("dwell")", "dwell");
}

TEST(RecipeLoaderFast, RampTooFastForTheRbwIsRefused) {
  // 1 ms < 2.5 x 110.55 MHz / (300 kHz)^2 = 3.07 ms.
  expect_error(replace(kFast, R"("source_sweep_time_s": 0.005)", R"("source_sweep_time_s": 0.001)"),
               "/fast_capture/source_sweep_time_s", R"("source_sweep_time_s")", "too short");
}

TEST(RecipeLoaderFast, ReceiverSweepShorterThanOneRampPerBinIsRefused) {
  // 200 bins x 5 ms = 1 s is the least.
  expect_error(replace(kFast, R"("receiver_sweep_time_s": 2.0)", R"("receiver_sweep_time_s": 0.9)"),
               "/fast_capture/receiver_sweep_time_s", R"("receiver_sweep_time_s")", "at least 1 s");
}

TEST(RecipeLoaderFast, BadValuesAreNamed) {
  expect_error(replace(kFast, R"("receiver_sweeps": 1)", R"("receiver_sweeps": 0)"), "/fast_capture/receiver_sweeps",
               R"("receiver_sweeps")", "1 to 100");
  expect_error(replace(kFast, R"("rbw_hz": "300 kHz")", R"("rbw_hz": "30 MHz")"), "/fast_capture/rbw_hz",
               R"("rbw_hz": "30 MHz")", "above 10 MHz");
  expect_error(replace(kFast, R"("source_sweep_time_s": 0.005)", R"("source_sweep_time_s": "fast")"),
               "/fast_capture/source_sweep_time_s", R"("source_sweep_time_s")", "");
}

TEST(RecipeLoaderFast, TooManyPointsForOneTraceIsRefused) {
  expect_error(replace(kFast, R"("points": 201)", R"("points": 20001)"), "/segments", R"("segments")", "at most 10001");
}

TEST(FastCapturePlan, UnevenPlanIsInterpolatedOntoItsPoints) {
  // 0..10 MHz step 1 MHz, then 10..12 MHz step 0.5 MHz: bins every 0.5 MHz, 25 of them.
  const std::vector<double> plan{1e6, 2e6, 3e6, 4e6, 5e6, 6e6, 7e6, 8e6, 9e6, 10e6, 10.5e6, 11e6, 11.5e6, 12e6};
  const FastCaptureAxis axis = fast_capture_axis(plan);
  EXPECT_FALSE(axis.bins_on_plan);
  EXPECT_EQ(axis.points, 23);   // 1..12 MHz every 0.5 MHz
  std::vector<double> trace;
  for (int i = 0; i < axis.points; ++i) trace.push_back(-10.0 - i);   // -10 dBm at 1 MHz, -1 dB per bin
  auto readings = trace_to_plan(axis, trace, plan);
  ASSERT_TRUE(readings.ok());
  ASSERT_EQ(readings->size(), plan.size());
  EXPECT_DOUBLE_EQ((*readings)[1].raw_dbm, -12.0);    // 2 MHz is bin 2
  EXPECT_DOUBLE_EQ((*readings)[13].raw_dbm, -32.0);   // 12 MHz is the last bin
  // A trace of the wrong length is refused.
  trace.pop_back();
  EXPECT_FALSE(trace_to_plan(axis, trace, plan).ok());
}

TEST(FastCapturePlan, EvenPlanPutsOneBinOnEachPoint) {
  const std::vector<double> plan{100e6, 200e6, 300e6};
  const FastCaptureAxis axis = fast_capture_axis(plan);
  EXPECT_TRUE(axis.bins_on_plan);
  auto readings = trace_to_plan(axis, {-1, -2, -3}, plan);
  ASSERT_TRUE(readings.ok());
  EXPECT_DOUBLE_EQ((*readings)[2].frequency_hz, 300e6);
  EXPECT_DOUBLE_EQ((*readings)[2].raw_dbm, -3);
}

}  // namespace
}  // namespace echoline::core
