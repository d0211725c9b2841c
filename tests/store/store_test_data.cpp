// Invented demo data for the store tests (see store_test_data.hpp).
#include "tests/store/store_test_data.hpp"

#include <fmt/format.h>

#include <cmath>
#include <complex>
#include <limits>
#include <random>
#include <unistd.h>

namespace echoline::store::testdata {

std::filesystem::path temp_dir(const std::string& tag) {
  static int counter = 0;
  auto dir = std::filesystem::temp_directory_path() /
             fmt::format("echoline-store-{}-{}-{}", tag, ::getpid(), counter++);
  std::filesystem::remove_all(dir);
  std::filesystem::create_directories(dir);
  return dir;
}

std::string utc_at(int index) {
  return fmt::format("2026-03-02T{:02}:{:02}:{:02}.000Z", 8 + index / 3600, (index / 60) % 60, index % 60);
}

core::RunResult make_run(const std::string& serial, const std::string& lot, int index, double f0_hz,
                         core::Verdict verdict, core::FailureClass cls, int points) {
  core::RunResult r;
  r.run_id = fmt::format("20260302T08{:04}Z-{}-{:04}", index, serial, index);
  r.serial = serial;
  r.lot = lot;
  r.station = "line2-bench1";
  r.operator_name = "mk";
  r.recipe = {"whip-915", "3", "9f3c0a77d2"};
  r.decision_rule = "guarded";
  r.instruments = {{"source", "Echoline,SIM-SRC,SRC0001,1.0"}, {"receiver", "Echoline,SIM-SA,SA0002,2.1"}};
  r.started_utc = utc_at(index);
  r.ended_utc = utc_at(index + 1);
  r.temperature_c = 23.5;
  r.calibration_id = "cal-0001";
  r.verdict = verdict;
  r.failure_class = cls;
  r.reason = verdict == core::Verdict::pass ? "resonance and depth inside limits" : "resonance outside the window";
  // Series RLC near resonance: Z = R + jQR(f/f0 - f0/f); RL = -20 log10 |(Z-50)/(Z+50)|.
  const double r_ohm = 42, q = 18;
  double best_rl = 0, best_f = 0;
  for (int i = 0; i < points; ++i) {
    const double f = 880e6 + (950e6 - 880e6) * i / std::max(points - 1, 1);
    const std::complex<double> z(r_ohm, q * r_ohm * (f / f0_hz - f0_hz / f));
    const double rl = -20 * std::log10(std::abs((z - 50.0) / (z + 50.0)));
    core::PointResult p{f, -10 - rl, rl, rl - 1.5, rl > 28 ? std::numeric_limits<double>::infinity() : rl + 2.0};
    r.points.push_back(p);
    if (rl > best_rl) { best_rl = rl; best_f = f; }
  }
  r.metrics.resonance_hz = best_f;
  r.metrics.depth_db = best_rl;
  r.metrics.bandwidth_hz = 30e6;
  r.metrics.band_low_hz = best_f - 15e6;
  r.metrics.band_high_hz = best_f + 15e6;
  r.metrics.min_margin_db = 1.25;
  r.metrics.vswr_at_resonance = 1.19;
  r.metrics.mismatch_loss_db = 0.04;
  r.metrics.directivity_db = 31.2;
  if (verdict != core::Verdict::pass) {
    r.trim = core::TrimAdvice{82.0, -1.4, best_f, 915e6, "cut 1.4 mm from the element"};
  }
  r.timings = {4.2, 3.9, 0.01};
  return r;
}

core::Limits demo_limits() {
  core::Limits l;
  l.mask.push_back({902e6, 928e6, 9.5424});
  l.resonance_min_hz = 905e6;
  l.resonance_max_hz = 925e6;
  return l;
}

core::CalibrationRecord make_calibration(const std::string& id, const std::string& created_utc, int points) {
  core::CalibrationRecord c;
  c.id = id;
  c.created_utc = created_utc;
  c.recipe = {"whip-915", "3", "9f3c0a77d2"};
  c.station = "line2-bench1";
  c.instruments = {{"source", "Echoline,SIM-SRC,SRC0001,1.0"}};
  c.temperature_c = 22.0;
  for (const char* standard : {"OPEN", "SHORT", "LOAD"}) {
    for (int i = 0; i < points; ++i) {
      const double f = 880e6 + 70e6 * i / (points - 1);
      const double raw = std::string(standard) == "LOAD" ? -52.0 + 0.01 * i : -20.5 + 0.001 * i;
      c.traces[standard].push_back({f, raw});
    }
  }
  for (int i = 0; i < points; ++i) {
    c.reference_dbm.push_back(-20.5 + 0.001 * i);
    c.directivity_db.push_back(31.5 - 0.01 * i);
  }
  c.min_directivity_db = 29.5;
  c.noise_margin_db = 38;
  c.warnings = {"SHORT and OPEN differ by 0.8 dB at 949.6 MHz"};
  c.valid = true;
  c.max_age_s = 28800;
  c.max_units = 500;
  c.max_temperature_change_c = 5;
  return c;
}

}  // namespace echoline::store::testdata
