// Invented benchmark data from the one-port error model (daemon/core/MEASUREMENT.md §1).
#include "tests/bench/bench_data.hpp"

#include <unistd.h>

#include <cmath>
#include <cstdlib>
#include <complex>
#include <numbers>

#include <fmt/format.h>

#include "daemon/core/judge.hpp"
#include "daemon/core/recipe_loader.hpp"

#ifndef ECHOLINE_SOURCE_DIR
#error "ECHOLINE_SOURCE_DIR must be defined"
#endif

namespace echoline::bench {
namespace {

using cd = std::complex<double>;

// Full-reflection level: -10 dBm source - 20 dB coupling - 0.5 dB main line - 2 x 0.3 dB cable.
constexpr double kReflectionDbm = -31.1;

double reading_dbm(double f, cd gamma) {
  const double phase = 2 * std::numbers::pi * f * 5e-9;   // 5 ns of cable rotates the error terms
  const cd ed = std::polar(std::pow(10.0, -35.0 / 20), phase);
  const cd es = std::polar(std::pow(10.0, -25.0 / 20), 0.7 * phase);
  const cd m = ed + gamma / (1.0 - es * gamma);
  return kReflectionDbm + 20 * std::log10(std::abs(m));
}

// Series RLC: Z = R + jQR(f/f0 - f0/f), Γ = (Z - 50)/(Z + 50) (common practice, no source).
cd antenna(double f, double f0) {
  const double r = 40, q = 8;
  const cd z(r, q * r * (f / f0 - f0 / f));
  return (z - 50.0) / (z + 50.0);
}

std::vector<core::Reading> measure(const core::Recipe& recipe, auto gamma) {
  std::vector<core::Reading> out;
  for (double f : core::plan_frequencies(recipe)) out.push_back(core::Reading{f, reading_dbm(f, gamma(f))});
  return out;
}

}  // namespace

std::filesystem::path temp_folder() {
  static const std::filesystem::path dir = [] {
    auto d = std::filesystem::temp_directory_path() / fmt::format("echoline-bench-{}", ::getpid());
    std::filesystem::create_directories(d);
    std::atexit([] {
      std::error_code ec;
      std::filesystem::remove_all(std::filesystem::temp_directory_path() / fmt::format("echoline-bench-{}", ::getpid()), ec);
    });
    return d;
  }();
  return dir;
}

core::Recipe whip_recipe(int points) {
  core::Recipe r = core::load_recipe(std::filesystem::path(ECHOLINE_SOURCE_DIR) / "config/recipes/whip915.jsonc");
  r.segments.resize(1);
  r.segments[0].points = points;
  return r;
}

core::StationCapability station_capability() {
  core::StationCapability s;
  s.directivity_db = 35;
  s.source_match_db = 25;
  s.coupling_db = 20;
  s.mainline_loss_db = 0.5;
  s.cable_loss_db = 0.3;
  s.noise_floor_dbm = -110;
  s.receiver_max_safe_input_dbm = 20;
  s.source_min_hz = 9e3;
  s.source_max_hz = 6e9;
  s.receiver_min_hz = 9e3;
  s.receiver_max_hz = 6e9;
  s.source_max_power_dbm = 20;
  return s;
}

std::map<std::string, std::vector<core::Reading>> standard_traces(const core::Recipe& recipe) {
  return {{"OPEN", measure(recipe, [](double) { return cd(1, 0); })},
          {"SHORT", measure(recipe, [](double) { return cd(-1, 0); })},
          {"LOAD", measure(recipe, [](double) { return cd(std::pow(10.0, -60.0 / 20), 0); })}};
}

std::vector<core::Reading> dut_readings(const core::Recipe& recipe, double f0_hz) {
  return measure(recipe, [f0_hz](double f) { return antenna(f, f0_hz); });
}

core::RunResult make_run(const core::Recipe& recipe, const core::CalibrationRecord& cal, const std::string& lot,
                         int index) {
  const double f0 = 895e6 + 40e6 * std::fmod(index * 0.618034, 1.0);
  core::Judgement j = core::judge(recipe, cal, dut_readings(recipe, f0));
  core::RunResult run;
  run.run_id = fmt::format("bench-{}-{:06d}", lot, index);
  run.serial = fmt::format("WH915A-{:05d}", index);
  run.lot = lot;
  run.station = "line2-bench1";
  run.operator_name = "kim";
  run.recipe = core::RecipeRef{recipe.name, recipe.version, recipe.content_hash};
  run.decision_rule = core::to_string(recipe.rule);
  run.instruments = {{"source", "Echoline,SIM-SRC,SRC0001,1.0"}, {"receiver", "Echoline,SIM-SA,SA0001,1.0"}};
  const int day = index / 86400, sec = index % 86400;
  run.started_utc = fmt::format("2026-03-{:02d}T{:02d}:{:02d}:{:02d}.000Z", 2 + day, sec / 3600, sec / 60 % 60, sec % 60);
  run.ended_utc = run.started_utc;
  run.calibration_id = cal.id;
  run.verdict = j.verdict;
  run.failure_class = j.failure_class;
  run.reason = j.reason;
  run.metrics = j.metrics;
  run.trim = j.trim;
  run.points = std::move(j.points);
  run.timings = core::Timings{0.5, 0.45, 0.001};
  return run;
}

}  // namespace echoline::bench
