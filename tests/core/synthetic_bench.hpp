// Test helpers for the core tests: a whip-like recipe built in code and raw readings computed
// from the one-port model b = E_D + Γ/(1 − E_S·Γ) (common practice) around a fixed level.
// Header-only; used by the calibration and judge tests.
#pragma once

#include <cmath>
#include <complex>
#include <functional>
#include <map>
#include <numbers>
#include <string>
#include <vector>

#include "daemon/core/calibration.hpp"
#include "daemon/core/recipe.hpp"
#include "daemon/core/recipe_check.hpp"
#include "daemon/core/run_result.hpp"

namespace echoline::core::testing_bench {

using cd = std::complex<double>;

inline Recipe whip_recipe(DecisionRule rule = DecisionRule::guarded) {
  Recipe r;
  r.name = "whip915-test";
  r.version = "1";
  r.content_hash = "feed";
  r.segments = {Segment{860e6, 970e6, 201}};
  r.source.power_dbm = -10;
  r.limits.mask = {LimitSegment{902e6, 928e6, 10}};
  r.limits.resonance_min_hz = 905e6;
  r.limits.resonance_max_hz = 925e6;
  r.rule = rule;
  r.trim = Trim{78.0, 915e6};
  return r;
}

inline StationCapability station() {
  StationCapability s;
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
  s.source_max_power_dbm = 13;
  s.source_match_db = 30;
  // The synthetic standards are ideal and the LOAD is 60 dB: a kit that says so (the budget then
  // adds only the LOAD residual it states and the measured noise, which is zero here).
  s.kit.identity = "synthetic ideal kit";
  s.kit.serial = "T-0";
  s.kit.open = ReflectStandard{};
  s.kit.short_ = ReflectStandard{};
  s.kit.load = {LoadStep{6e9, 60}};
  s.kit.connection_repeatability = 0;
  return s;
}

// A kit's quarter-wave offset line at 915 MHz (1/(4f) = 273.2 ps, definition of delay) as a data
// sheet would state it: ±2 ps, 0.08 ± 0.04 dB, both ends together no worse than `match_db`.
inline OffsetLine quarter_wave_line(double match_db = 39) {
  OffsetLine l;
  l.delay_s = 273.2e-12;
  l.delay_tolerance_s = 2e-12;
  l.loss_db = 0.08;
  l.loss_tolerance_db = 0.04;
  l.match = std::pow(10.0, -match_db / 20);
  return l;
}

// Full-reflection level of the synthetic bench: −10 − 20 − 0.5 − 2·0.3 dBm.
inline constexpr double kReflectionDbm = -31.1;

struct Bench {
  double directivity_db = 35;
  double source_match_db = 30;
  double delay_s = 5e-9;   // rotates the error terms' phase over frequency
  double level_dbm = kReflectionDbm;
};

inline double reading_dbm(const Bench& b, double f, cd gamma) {
  const double phase = 2 * std::numbers::pi * f * b.delay_s;
  const cd ed = std::polar(std::pow(10.0, -b.directivity_db / 20), phase);
  const cd es = std::polar(std::pow(10.0, -b.source_match_db / 20), 0.7 * phase);
  const cd m = ed + gamma / (1.0 - es * gamma);
  return b.level_dbm + 20 * std::log10(std::abs(m));
}

inline std::vector<Reading> measure(const Recipe& r, const Bench& b, const std::function<cd(double)>& gamma) {
  std::vector<Reading> out;
  for (double f : plan_frequencies(r)) out.push_back(Reading{f, reading_dbm(b, f, gamma(f))});
  return out;
}

// Series RLC antenna around f0 (textbook; Balanis, Antenna Theory [memory]): Z = R + j·Q·R·(f/f0 − f0/f), Γ = (Z−50)/(Z+50).
inline cd antenna(double f, double f0, double q, double r_ohm) {
  const cd z(r_ohm, q * r_ohm * (f / f0 - f0 / f));
  return (z - 50.0) / (z + 50.0);
}

inline std::map<std::string, std::vector<Reading>> standards(const Recipe& r, const Bench& b) {
  return {{"OPEN", measure(r, b, [](double) { return cd(1, 0); })},
          {"SHORT", measure(r, b, [](double) { return cd(-1, 0); })},
          {"LOAD", measure(r, b, [](double) { return cd(std::pow(10.0, -60.0 / 20), 0); })},
          // Repeats of a noiseless bench: the measured reading noise is zero.
          {"OPEN/repeat", measure(r, b, [](double) { return cd(1, 0); })},
          {"LOAD/repeat", measure(r, b, [](double) { return cd(std::pow(10.0, -60.0 / 20), 0); })}};
}

inline CalibrationRecord calibrate(const Recipe& r, const Bench& b = {}) {
  return build_calibration(r, standards(r, b), station(), "cal-1", "2026-12-01T08:00:00Z");
}

// Readings giving exactly the return loss rl(f) against a calibration's reference.
inline std::vector<Reading> readings_for(const Recipe& r, const CalibrationRecord& cal,
                                         const std::function<double(double)>& rl) {
  std::vector<Reading> out;
  const auto plan = plan_frequencies(r);
  for (std::size_t i = 0; i < plan.size(); ++i) out.push_back(Reading{plan[i], cal.reference_dbm[i] - rl(plan[i])});
  return out;
}

}  // namespace echoline::core::testing_bench
