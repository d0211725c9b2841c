// Recipe files in fast-capture mode: "mode" and the "fast_capture" limits load with their
// defaults, each mistake names file, line and key path, hand-set timing keys are refused with a
// pointer to the limits, and the shipped recipe plans on the simulator's profiles.
#include <cmath>
#include <string>

#include <gtest/gtest.h>

#include "daemon/core/fast_capture_plan.hpp"
#include "daemon/core/recipe_loader.hpp"
#include "daemon/core/station_capability.hpp"
#include "drivers/profile.hpp"
#include "drivers/config_error.hpp"
#include "tests/support/demo_fixture.hpp"
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
    "max_capture_s": 0.5,
    "min_load_margin_db": 15
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
  EXPECT_DOUBLE_EQ(r.fast_capture.max_capture_s, 0.5);
  EXPECT_DOUBLE_EQ(r.fast_capture.min_load_margin_db, 15);
}

TEST(RecipeLoaderFast, ShippedFastRecipePlansOnTheSimulatorProfiles) {
  const auto root = echoline::testing::source_dir();
  Recipe r = load_recipe(root / "config/recipes/whip915-fast.jsonc");
  EXPECT_EQ(r.mode, SweepMode::fast_capture);
  auto plan = plan_fast_capture(r, echoline::testing::demo_fixture(), drivers::load_profile(root / "config/instruments/sim-source.jsonc"),
                                drivers::load_profile(root / "config/instruments/sim-receiver.jsonc"));
  ASSERT_TRUE(plan.ok()) << plan.error().message;
  EXPECT_TRUE(plan->axis.bins_on_plan);
  EXPECT_EQ(plan->axis.points, 223);   // 221 plan points and one bin beyond each end
  EXPECT_LE(plan->capture_s, r.fast_capture.max_capture_s);
}

TEST(RecipeLoaderFast, ModeWithoutBlockTakesDefaults) {
  std::string text = replace(kFast, R"("fast_capture": {
    "max_capture_s": 0.5,
    "min_load_margin_db": 15
  },
)", "");
  Recipe r = parse_recipe(text, "ok.jsonc");
  EXPECT_EQ(r.mode, SweepMode::fast_capture);
  EXPECT_DOUBLE_EQ(r.fast_capture.max_capture_s, 10);
  EXPECT_DOUBLE_EQ(r.fast_capture.min_load_margin_db, 20);
}

TEST(RecipeLoaderFast, UnknownModeIsNamed) {
  expect_error(replace(kFast, R"("mode": "fast-capture")", R"("mode": "swept")"), "/mode", R"("mode")", "swept");
}

TEST(RecipeLoaderFast, UnknownKeyInBlockIsNamed) {
  expect_error(replace(kFast, R"("min_load_margin_db": 15)", R"("min_load_margin_db": 15, "dwell": 3)"),
               "/fast_capture/dwell", R"("dwell")", "dwell");
}

TEST(RecipeLoaderFast, HandSetTimingIsRefusedWithAPointerToTheLimits) {
  expect_error(replace(kFast, R"("max_capture_s": 0.5,)", R"("max_capture_s": 0.5, "receiver_sweep_time_s": 2.0,)"),
               "/fast_capture/receiver_sweep_time_s", R"("receiver_sweep_time_s")", "max_capture_s and min_load_margin_db");
  expect_error(replace(kFast, R"("max_capture_s": 0.5,)", R"("max_capture_s": 0.5, "rbw_hz": "300 kHz",)"),
               "/fast_capture/rbw_hz", R"("rbw_hz": "300 kHz")", "plans the RBW");
}

TEST(RecipeLoaderFast, BadValuesAreNamed) {
  expect_error(replace(kFast, R"("max_capture_s": 0.5)", R"("max_capture_s": 0)"), "/fast_capture/max_capture_s",
               R"("max_capture_s")", "");
  expect_error(replace(kFast, R"("min_load_margin_db": 15)", R"("min_load_margin_db": -3)"),
               "/fast_capture/min_load_margin_db", R"("min_load_margin_db")", "");
  expect_error(replace(kFast, R"("max_capture_s": 0.5)", R"("max_capture_s": "fast")"), "/fast_capture/max_capture_s",
               R"("max_capture_s")", "");
}

}  // namespace
}  // namespace echoline::core
