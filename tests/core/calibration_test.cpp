// OPEN/SHORT/LOAD calibration: reference, directivity, sanity checks, due, drift
// (daemon/core/calibration.hpp).
#include "daemon/core/calibration.hpp"

#include <cmath>
#include <complex>
#include <numbers>

#include <gtest/gtest.h>

#include "tests/core/synthetic_bench.hpp"

namespace echoline::core {
namespace {

using namespace testing_bench;

bool any_contains(const std::vector<std::string>& v, const std::string& needle) {
  for (const auto& s : v) {
    if (s.find(needle) != std::string::npos) return true;
  }
  return false;
}

std::string joined(const std::vector<std::string>& v) {
  std::string s;
  for (const auto& x : v) s += x + "\n";
  return s;
}

// Check values computed from the one-port model (common practice; E_R = 1, dB average of OPEN and SHORT):
//   D 30, E_S 0, φ 0°:   OPEN +0.2704, SHORT −0.2791, dB avg −0.0043
//   D 30, E_S 0, φ 90°:  OPEN +0.0043, SHORT +0.0043, dB avg +0.0043
//   D ∞, M_S 20, φ 0°:   OPEN +0.9151, SHORT −0.8279, dB avg +0.0436
//   D 30, M_S 20, φ 0°:  OPEN +1.1589, SHORT −1.1354, dB avg +0.0118
// Fed to build_calibration as raw traces around 0 dBm; the reference must be the dB average.
TEST(Calibration, OpenShortAveragingMatchesReferenceCheckValues) {
  struct Case { double d_db, ms_db, phi_deg, open_db, short_db, avg_db; };
  const Case cases[] = {{30, 1e9, 0, 0.2704, -0.2791, -0.0043},
                        {30, 1e9, 90, 0.0043, 0.0043, 0.0043},
                        {1e9, 20, 0, 0.9151, -0.8279, 0.0436},
                        {30, 20, 0, 1.1589, -1.1354, 0.0118}};
  Recipe r = whip_recipe();
  r.segments = {Segment{900e6, 903e6, 4}};
  r.limits.mask = {LimitSegment{900e6, 903e6, 10}};
  r.limits.resonance_min_hz.reset();
  r.limits.resonance_max_hz.reset();
  r.source.power_dbm = 20 + 0.5 + 0.6;   // expected full reflection = 0 dBm on the station below
  std::map<std::string, std::vector<Reading>> traces;
  const auto plan = plan_frequencies(r);
  for (std::size_t i = 0; i < 4; ++i) {
    const Case& c = cases[i];
    const std::complex<double> ed = std::polar(std::pow(10.0, -c.d_db / 20), c.phi_deg * std::numbers::pi / 180);
    const double es = std::pow(10.0, -c.ms_db / 20);
    const double open = 20 * std::log10(std::abs(ed + 1.0 / (1.0 - es)));
    const double shrt = 20 * std::log10(std::abs(ed - 1.0 / (1.0 + es)));
    EXPECT_NEAR(open, c.open_db, 0.0001);   // the model reproduces the table
    EXPECT_NEAR(shrt, c.short_db, 0.0001);
    traces["OPEN"].push_back({plan[i], open});
    traces["SHORT"].push_back({plan[i], shrt});
    traces["LOAD"].push_back({plan[i], -40});
  }
  CalibrationRecord cal = build_calibration(r, traces, station(), "c", "t");
  ASSERT_TRUE(cal.valid) << joined(cal.errors);
  for (std::size_t i = 0; i < 4; ++i) {
    EXPECT_NEAR(cal.reference_dbm[i], cases[i].avg_db, 0.0001) << "case " << i;
    EXPECT_NEAR(cal.directivity_db[i], cases[i].avg_db + 40, 0.0001);
  }
  EXPECT_NEAR(cal.min_directivity_db, -0.0043 + 40, 0.0001);
}

// A clean synthetic bench (D 35 dB, LOAD 45 dB) calibrates without remarks and reports the
// coupler's directivity within the ±(error) the LOAD's own reflection allows.
TEST(Calibration, CleanBenchIsValid) {
  Recipe r = whip_recipe();
  CalibrationRecord cal = calibrate(r);
  EXPECT_TRUE(cal.valid) << joined(cal.errors);
  EXPECT_TRUE(cal.errors.empty());
  EXPECT_TRUE(cal.warnings.empty()) << joined(cal.warnings);
  ASSERT_EQ(cal.reference_dbm.size(), 201u);
  EXPECT_GT(cal.min_directivity_db, 30);
  EXPECT_LT(cal.min_directivity_db, 36);
  EXPECT_TRUE(std::isfinite(cal.noise_margin_db));
  EXPECT_GT(cal.noise_margin_db, 30);
  EXPECT_EQ(cal.recipe.content_hash, "feed");
  EXPECT_EQ(cal.max_units, r.calibration.max_units);
}

// A LOAD connected where the OPEN belongs reads ~35 dB low: the level check names the standard
// and a frequency, and the spread check catches it too.
TEST(Calibration, LoadConnectedAsOpenIsCaught) {
  Recipe r = whip_recipe();
  auto traces = standards(r, Bench{});
  traces["OPEN"] = traces["LOAD"];
  CalibrationRecord cal = build_calibration(r, traces, station(), "c", "t");
  EXPECT_FALSE(cal.valid);
  EXPECT_TRUE(any_contains(cal.errors, "OPEN reads")) << joined(cal.errors);
  EXPECT_TRUE(any_contains(cal.errors, "MHz"));
  EXPECT_TRUE(any_contains(cal.errors, "LOAD connected instead"));
  EXPECT_TRUE(any_contains(cal.errors, "OPEN and SHORT differ"));
}

// A missing cable (no signal) makes every standard read far below the expected level.
TEST(Calibration, MissingCableIsCaughtByTheLevelCheck) {
  Recipe r = whip_recipe();
  Bench b;
  b.level_dbm = kReflectionDbm - 40;
  CalibrationRecord cal = build_calibration(r, standards(r, b), station(), "c", "t");
  EXPECT_FALSE(cal.valid);
  EXPECT_TRUE(any_contains(cal.errors, "OPEN reads")) << joined(cal.errors);
  EXPECT_TRUE(any_contains(cal.errors, "SHORT reads"));
}

// The LOAD is the directivity: a shallow LOAD (bad standard, or an OPEN on the LOAD port)
// below 20 dB makes the calibration invalid.
TEST(Calibration, ShallowLoadIsNotValid) {
  Recipe r = whip_recipe();
  auto traces = standards(r, Bench{});
  for (auto& rd : traces["LOAD"]) rd.raw_dbm = kReflectionDbm - 14;
  CalibrationRecord cal = build_calibration(r, traces, station(), "c", "t");
  EXPECT_FALSE(cal.valid);
  EXPECT_TRUE(any_contains(cal.errors, "directivity under 20 dB")) << joined(cal.errors);
  EXPECT_TRUE(any_contains(cal.errors, "the LOAD is only")) << joined(cal.errors);
  EXPECT_TRUE(any_contains(cal.errors, " MHz (directivity under"));
}

TEST(Calibration, LoadNearTheNoiseFloorIsAWarning) {
  Recipe r = whip_recipe();
  auto traces = standards(r, Bench{});
  StationCapability st = station();
  st.noise_floor_dbm = traces["LOAD"][100].raw_dbm - 3;
  CalibrationRecord cal = build_calibration(r, traces, st, "c", "t");
  EXPECT_TRUE(cal.valid) << joined(cal.errors);
  EXPECT_TRUE(any_contains(cal.warnings, "noise floor")) << joined(cal.warnings);
}

TEST(Calibration, OpenOnlyWarnsAboutRipple) {
  Recipe r = whip_recipe();
  r.calibration.use_short = false;
  auto traces = standards(r, Bench{});
  traces.erase("SHORT");
  CalibrationRecord cal = build_calibration(r, traces, station(), "c", "t");
  EXPECT_TRUE(cal.valid) << joined(cal.errors);
  EXPECT_TRUE(any_contains(cal.warnings, "OPEN alone")) << joined(cal.warnings);
  EXPECT_DOUBLE_EQ(cal.reference_dbm[7], traces["OPEN"][7].raw_dbm);
}

TEST(Calibration, MissingOrMisalignedTracesAreNotValid) {
  Recipe r = whip_recipe();
  auto traces = standards(r, Bench{});
  traces.erase("SHORT");
  CalibrationRecord cal = build_calibration(r, traces, station(), "c", "t");
  EXPECT_FALSE(cal.valid);
  EXPECT_TRUE(any_contains(cal.errors, "SHORT standard was not measured"));

  traces = standards(r, Bench{});
  traces["LOAD"].pop_back();
  cal = build_calibration(r, traces, station(), "c", "t");
  EXPECT_FALSE(cal.valid);
  EXPECT_TRUE(any_contains(cal.errors, "LOAD trace has 200 readings but the plan has 201")) << joined(cal.errors);
}

// A fast-capture calibration stored before its budget carried the frequency-offset term (the
// key absent reads as 0) must not judge units: its readings may be half a bin off and nothing
// in its bounds says so. Derived in MEASUREMENT.md §11; no outside source.
TEST(CalibrationDue, FastCaptureCalibrationWithoutOffsetTermIsDue) {
  Recipe r = whip_recipe();
  CalibrationRecord cal = calibrate(r);
  r.mode = SweepMode::fast_capture;
  cal.budget.frequency_offset_hz = 0;
  const double t0 = 1.8e9;
  CalibrationState s = calibration_due(&cal, r, t0 + 60, t0, std::nullopt);
  EXPECT_TRUE(s.due);
  EXPECT_NE(s.reason.find("frequency-offset"), std::string::npos) << s.reason;
  cal.budget.frequency_offset_hz = 0.25e6;
  s = calibration_due(&cal, r, t0 + 60, t0, std::nullopt);
  EXPECT_EQ(s.reason.find("frequency-offset"), std::string::npos) << s.reason;
}

// A calibration made with the start-pulse cable bounds readings 10 Hz off their frequency; once
// the station plans free-running (the cable taken out of the config) its readings may be half a
// bin off, which that budget does not cover: due. The other way round it stays valid (a wider
// bound is only more cautious). Derived in MEASUREMENT.md §11; no outside source.
TEST(CalibrationDue, FastCalibrationIsDueWhenTheOffsetBoundGrows) {
  Recipe r = whip_recipe();
  CalibrationRecord cal = calibrate(r);
  r.mode = SweepMode::fast_capture;
  cal.budget.frequency_offset_hz = 10;
  const double t0 = 1.8e9;
  CalibrationState s = calibration_due(&cal, r, t0 + 60, t0, std::nullopt, 0.25e6);
  EXPECT_TRUE(s.due);
  EXPECT_NE(s.reason.find("start-pulse cable"), std::string::npos) << s.reason;
  s = calibration_due(&cal, r, t0 + 60, t0, std::nullopt, 10);
  EXPECT_FALSE(s.due) << s.reason;
  cal.budget.frequency_offset_hz = 0.25e6;
  s = calibration_due(&cal, r, t0 + 60, t0, std::nullopt, 10);
  EXPECT_FALSE(s.due) << s.reason;
}

// The budget keeps the source match and test-port delay the station config gave when it was
// made. An engineer who corrects them to worse figures must not go on testing with bounds that
// assumed the better ones; a better figure leaves the (wider) bounds safe. The synthetic station
// states 30 dB (|Γ| 0.0316); 20 dB is |Γ| 0.1 (common practice, no source).
TEST(CalibrationDue, AStationConfigNowWorseThanTheBudgetAssumedMakesItDue) {
  Recipe r = whip_recipe();
  r.source_match_db = 40;   // the fixture's figure decides
  CalibrationRecord cal = calibrate(r);
  StationCapability now = station();
  const double t0 = 1.8e9;
  EXPECT_FALSE(calibration_due(&cal, r, t0 + 60, t0, std::nullopt, -1, &now).due);
  now.source_match_db = 20;
  CalibrationState s = calibration_due(&cal, r, t0 + 60, t0, std::nullopt, -1, &now);
  EXPECT_TRUE(s.due);
  EXPECT_NE(s.reason.find("source match of 30.0 dB; the station config now states 20.0 dB"), std::string::npos) << s.reason;
  now.source_match_db = 35;
  EXPECT_FALSE(calibration_due(&cal, r, t0 + 60, t0, std::nullopt, -1, &now).due);
  now.test_port_delay_s = station().test_port_delay_s + 3e-9;
  s = calibration_due(&cal, r, t0 + 60, t0, std::nullopt, -1, &now);
  EXPECT_TRUE(s.due);
  EXPECT_NE(s.reason.find("test-port delay"), std::string::npos) << s.reason;
}

// The offset pair: a calibration made with the line on a switch arm keeps the kit's match; the
// same recipe on the station once the line is fitted by hand takes the match plus the line's
// connection (station_capability.cpp), which the calibration's bounds did not: it is due.
// 39 dB is |S11| 0.01122; + 0.003 is 0.01422, 36.9 dB (definition of return loss).
TEST(CalibrationDue, AnOffsetLineNowFittedByHandMakesItDue) {
  Recipe r = whip_recipe();
  r.offset_pair = true;
  StationCapability then = station();
  then.kit.offset_line = quarter_wave_line(39);
  const CalibrationRecord cal = build_calibration(r, standards(r, Bench{}), then, "cal-line", "2026-12-05T08:00:00Z");
  ASSERT_TRUE(cal.budget.offset_line.has_value());
  const double t0 = 1.8e9;
  EXPECT_FALSE(calibration_due(&cal, r, t0 + 60, t0, std::nullopt, -1, &then).due);
  StationCapability now = then;
  now.offset_line_by_hand = true;
  now.kit_line_match = now.kit.offset_line->match;
  now.kit.offset_line->match += 0.003;
  const CalibrationState s = calibration_due(&cal, r, t0 + 60, t0, std::nullopt, -1, &now);
  EXPECT_TRUE(s.due);
  EXPECT_NE(s.reason.find("offset line's match as 39.0 dB; the station now takes 36.9 dB"), std::string::npos) << s.reason;
  EXPECT_NE(s.reason.find("fitted by hand"), std::string::npos) << s.reason;
}

// A calibration made by a step sweep for one recipe, then another recipe selected that uses fast
// capture: the reason names the sweep modes, not an older version (common practice, no source).
TEST(CalibrationDue, StepCalibrationForAFastRecipeNamesBothModes) {
  Recipe r = whip_recipe();
  CalibrationRecord cal = calibrate(r);
  cal.id = "c1";
  Recipe fast = r;
  fast.name = "whip915-fast";
  fast.mode = SweepMode::fast_capture;
  fast.content_hash = "f00d";
  const double t0 = 1.8e9;
  CalibrationState s = calibration_due(&cal, fast, t0 + 60, t0, std::nullopt);
  EXPECT_TRUE(s.due);
  EXPECT_NE(s.reason.find("was made for a step sweep; this recipe uses fast capture"), std::string::npos) << s.reason;
  EXPECT_NE(s.reason.find("recipe whip915-test 1"), std::string::npos) << s.reason;
  EXPECT_EQ(s.reason.find("older version"), std::string::npos) << s.reason;
}

// Same recipe name and version, another sweep plan: the reason names the plans' point counts or
// frequencies (whip_recipe(): 201 points, 860 to 970 MHz).
TEST(CalibrationDue, OtherSweepPlanIsNamedByPointsAndFrequencies) {
  Recipe r = whip_recipe();
  CalibrationRecord cal = calibrate(r);
  const double t0 = 1.8e9;
  Recipe denser = r;
  denser.content_hash = "beef";
  denser.segments = {Segment{860e6, 970e6, 401}};
  CalibrationState s = calibration_due(&cal, denser, t0 + 60, t0, std::nullopt);
  EXPECT_TRUE(s.due);
  EXPECT_NE(s.reason.find("a plan of 201 points; this recipe uses 401 points"), std::string::npos) << s.reason;
  EXPECT_EQ(s.reason.find("not this one"), std::string::npos) << s.reason;

  Recipe shifted = r;
  shifted.content_hash = "beef";
  shifted.segments = {Segment{880e6, 960e6, 201}};
  s = calibration_due(&cal, shifted, t0 + 60, t0, std::nullopt);
  EXPECT_TRUE(s.due);
  EXPECT_NE(s.reason.find("frequencies 860.000 MHz to 970.000 MHz; this recipe uses frequencies 880.000 MHz to "
                          "960.000 MHz"), std::string::npos) << s.reason;
  EXPECT_EQ(s.reason.find("points"), std::string::npos) << s.reason;   // the counts agree

  // Same plan, another content of the same file: said as such.
  Recipe edited = r;
  edited.content_hash = "beef";
  s = calibration_due(&cal, edited, t0 + 60, t0, std::nullopt);
  EXPECT_TRUE(s.due);
  EXPECT_NE(s.reason.find("earlier content of recipe whip915-test 1"), std::string::npos) << s.reason;
}

TEST(CalibrationDue, NotValidSaysWhy) {
  Recipe r = whip_recipe();
  CalibrationRecord cal = calibrate(r);
  cal.id = "c7";
  cal.valid = false;
  cal.errors = {"the LOAD is only 14.0 dB below the reference"};
  CalibrationState s = calibration_due(&cal, r, 1.8e9 + 60, 1.8e9, std::nullopt);
  EXPECT_TRUE(s.due);
  EXPECT_EQ(s.reason, "the last calibration (c7) was not valid: the LOAD is only 14.0 dB below the reference");
}

TEST(CalibrationDue, ReasonsInOrder) {
  Recipe r = whip_recipe();
  EXPECT_TRUE(calibration_due(nullptr, r, 1000, 0, std::nullopt).due);
  CalibrationRecord cal = calibrate(r);
  cal.temperature_c = 22.0;
  const double t0 = 1.8e9;
  CalibrationState s = calibration_due(&cal, r, t0 + 3600, t0, 23.0);
  EXPECT_FALSE(s.due) << s.reason;

  s = calibration_due(&cal, r, t0 + 9 * 3600, t0, 23.0);
  EXPECT_TRUE(s.due);
  EXPECT_NE(s.reason.find("9.0 h old"), std::string::npos) << s.reason;

  cal.units_since = 500;
  s = calibration_due(&cal, r, t0 + 60, t0, 22.0);
  EXPECT_TRUE(s.due);
  EXPECT_NE(s.reason.find("500 units"), std::string::npos) << s.reason;
  cal.units_since = 0;

  s = calibration_due(&cal, r, t0 + 60, t0, 28.5);
  EXPECT_TRUE(s.due);
  EXPECT_NE(s.reason.find("temperature changed by 6.5"), std::string::npos) << s.reason;
  EXPECT_FALSE(calibration_due(&cal, r, t0 + 60, t0, std::nullopt).due);   // unknown: not a reason

  Recipe other = r;
  other.content_hash = "beef";
  s = calibration_due(&cal, other, t0 + 60, t0, 22.0);
  EXPECT_TRUE(s.due);
  EXPECT_NE(s.reason.find("recipe"), std::string::npos);

  cal.valid = false;
  EXPECT_TRUE(calibration_due(&cal, r, t0 + 60, t0, 22.0).due);
}

TEST(CheckStandard, DriftBeyondTheLimitIsReported) {
  Recipe r = whip_recipe();
  CalibrationRecord cal = calibrate(r);
  std::vector<Reading> again = cal.traces.at("OPEN");
  for (auto& rd : again) rd.raw_dbm += 0.4;
  std::string why = "stale";
  EXPECT_FALSE(check_standard_drifted(cal, "OPEN", again, 1.0, &why));
  EXPECT_TRUE(why.empty());
  again[100].raw_dbm += 1.1;   // 1.5 dB at 915 MHz
  EXPECT_TRUE(check_standard_drifted(cal, "OPEN", again, 1.0, &why));
  EXPECT_NE(why.find("OPEN"), std::string::npos) << why;
  EXPECT_NE(why.find("915.0 MHz"), std::string::npos) << why;
  EXPECT_NE(why.find("1.50 dB"), std::string::npos) << why;
  again.pop_back();
  EXPECT_TRUE(check_standard_drifted(cal, "OPEN", again, 1.0, &why));
  EXPECT_TRUE(check_standard_drifted(cal, "THRU", cal.traces.at("OPEN"), 1.0, nullptr));
}

// With use_mismatch the kit's mismatch standards are part of the calibration: their traces are
// kept under their names, their definitions go into the budget, and a missing one is an error.
TEST(Calibration, MismatchTracesAreKeptWithTheKitsDefinitions) {
  Recipe r = whip_recipe();
  r.calibration.use_mismatch = true;
  StationCapability st = station();
  MismatchStandard a;
  a.name = "MISMATCH-A";
  a.magnitude = 0.1;
  a.magnitude_tolerance = 0.002;
  MismatchStandard b = a;
  b.name = "MISMATCH-B";
  b.offset_delay_s = 137e-12;
  st.kit.mismatch = {a, b};
  const Bench bench;
  auto traces = standards(r, bench);
  traces["MISMATCH-A"] = measure(r, bench, [&](double f) { return mismatch_gamma(a, f); });
  traces["MISMATCH-B"] = measure(r, bench, [&](double f) { return mismatch_gamma(b, f); });
  CalibrationRecord cal = build_calibration(r, traces, st, "cal-mm", "2026-12-01T08:00:00Z");
  ASSERT_TRUE(cal.valid) << joined(cal.errors);
  EXPECT_EQ(cal.traces.at("MISMATCH-B").size(), 201u);
  EXPECT_EQ(cal.traces.at("MISMATCH-B")[7].raw_dbm, traces.at("MISMATCH-B")[7].raw_dbm);
  ASSERT_EQ(cal.budget.mismatch.size(), 2u);
  EXPECT_EQ(cal.budget.mismatch[1].name, "MISMATCH-B");
  EXPECT_DOUBLE_EQ(cal.budget.mismatch[1].offset_delay_s, 137e-12);
  EXPECT_DOUBLE_EQ(cal.budget.mismatch[0].magnitude_tolerance, 0.002);

  traces.erase("MISMATCH-B");
  cal = build_calibration(r, traces, st, "cal-mm2", "2026-12-01T08:00:00Z");
  EXPECT_FALSE(cal.valid);
  EXPECT_TRUE(any_contains(cal.errors, "the MISMATCH-B standard was not measured")) << joined(cal.errors);

  // Without use_mismatch the same traces are kept but not required, and definitions are stored
  // only for the standards measured.
  r.calibration.use_mismatch = false;
  cal = build_calibration(r, traces, st, "cal-mm3", "2026-12-01T08:00:00Z");
  ASSERT_TRUE(cal.valid) << joined(cal.errors);
  ASSERT_EQ(cal.budget.mismatch.size(), 1u);
  EXPECT_EQ(cal.budget.mismatch[0].name, "MISMATCH-A");
}

}  // namespace
}  // namespace echoline::core
