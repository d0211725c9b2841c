// The uncertainty budget (daemon/core/uncertainty.hpp): the interval it gives must hold the true
// return loss on a bench whose standards, LOAD, source match and leakage phase are all
// imperfect, for every error phase. The bench below is written here, independently of the
// core's code, from the one-port model (common practice, no source).
#include "daemon/core/uncertainty.hpp"

#include <cmath>
#include <complex>
#include <map>
#include <numbers>
#include <random>
#include <vector>

#include <gtest/gtest.h>

#include "daemon/core/analysis.hpp"
#include "daemon/core/calibration.hpp"
#include "daemon/core/rf_math.hpp"
#include "tests/core/synthetic_bench.hpp"

namespace echoline::core {
namespace {

using cd = std::complex<double>;
constexpr double kPi = std::numbers::pi;

// An imperfect bench: leakage of magnitude eps_d turning with delay_s, source match eps_s, a
// LOAD of 40 dB at a given phase, OPEN/SHORT with fringe / inductance and 0.998 magnitude,
// Gaussian reading noise of sigma_db per reading.
struct ImperfectBench {
  double eps_d = std::pow(10.0, -30.0 / 20);
  double eps_s = std::pow(10.0, -25.0 / 20);
  double delay_s = 3e-9;
  double phase0 = 0;
  double load_phase = 0;
  double sigma_db = 0.03;
  double level_dbm = -31;
  mutable std::mt19937_64 rng{7};

  cd open(double f) const {
    const double w = 2 * kPi * f;
    return 0.998 * cd(1, -w * 10e-15 * 50) / cd(1, w * 10e-15 * 50);
  }
  cd shrt(double f) const {
    const double w = 2 * kPi * f;
    return 0.998 * (cd(0, w * 10e-12) - 50.0) / (cd(0, w * 10e-12) + 50.0);
  }
  cd load(double) const { return std::polar(std::pow(10.0, -40.0 / 20), load_phase); }
  double read(double f, cd gamma) const {
    const cd ed = std::polar(eps_d, phase0 + 2 * kPi * f * delay_s);
    const cd es = std::polar(eps_s, 0.6 * phase0 + 2 * kPi * f * 2 * delay_s);
    std::normal_distribution<double> n(0, sigma_db);
    return level_dbm + 20 * std::log10(std::abs(ed + gamma / (1.0 - es * gamma))) + n(rng);
  }
};

Recipe plan_recipe() {
  Recipe r = testing_bench::whip_recipe();
  r.segments = {Segment{860e6, 970e6, 221}};
  return r;
}

// The kit that describes ImperfectBench's standards, with small tolerances.
CalKit bench_kit() {
  CalKit k;
  k.identity = "test kit";
  k.serial = "K-1";
  k.open.min_magnitude = 0.995;
  k.open.fringe_capacitance_f = 10e-15;
  k.open.phase_tolerance_rad = 1 * kPi / 180;
  k.short_.min_magnitude = 0.995;
  k.short_.inductance_h = 10e-12;
  k.short_.phase_tolerance_rad = 1 * kPi / 180;
  k.load = {LoadStep{6e9, 39}};
  return k;
}

std::map<std::string, std::vector<Reading>> measure_standards(const Recipe& r, const ImperfectBench& b) {
  std::map<std::string, std::vector<Reading>> t;
  for (double f : plan_frequencies(r)) {
    t["OPEN"].push_back({f, b.read(f, b.open(f))});
    t["SHORT"].push_back({f, b.read(f, b.shrt(f))});
    t["LOAD"].push_back({f, b.read(f, b.load(f))});
    t["OPEN/repeat"].push_back({f, b.read(f, b.open(f))});
    t["LOAD/repeat"].push_back({f, b.read(f, b.load(f))});
  }
  return t;
}

StationCapability station_with(const CalKit& kit) {
  StationCapability s = testing_bench::station();
  s.kit = kit;
  s.source_match_db = 25;
  s.test_port_delay_s = 3e-9;
  return s;
}

// Every point of many units, every leakage phase, LOAD phase and noise draw: the true return
// loss lies in [worst, best]. The classic bound |Γ| ± ρ_D alone misses some of these points
// (the LOAD's own reflection and the noise are left out), which is what the budget is for.
TEST(UncertaintyBudget, IntervalHoldsTheTrueReturnLossOnAnImperfectBench) {
  const Recipe r = plan_recipe();
  const CalKit kit = bench_kit();
  long points = 0, outside = 0, classic_outside = 0;
  for (int trial = 0; trial < 24; ++trial) {
    ImperfectBench b;
    b.phase0 = 2 * kPi * trial / 24;
    b.load_phase = 2 * kPi * ((trial * 7) % 24) / 24;
    b.rng.seed(100 + trial);
    const auto traces = measure_standards(r, b);
    const CalibrationRecord cal = build_calibration(r, traces, station_with(kit), "c", "2026-12-01T00:00:00Z");
    ASSERT_TRUE(cal.valid) << (cal.errors.empty() ? "" : cal.errors.front());
    const auto plan = plan_frequencies(r);
    for (double f0 : {905e6, 915e6, 930e6}) {
      for (std::size_t i = 0; i < plan.size(); ++i) {
        const cd g = testing_bench::antenna(plan[i], f0, 9, 45);
        const double raw = b.read(plan[i], g);
        const double truth = return_loss_from_gamma(std::abs(g));
        const ReturnLossBounds bb = budget_bounds(cal.budget, i, cal.reference_dbm[i], raw);
        ++points;
        if (truth < bb.worst_db - 1e-9 || truth > bb.best_db + 1e-9) ++outside;
        const ReturnLossBounds classic =
            return_loss_bounds(cal.reference_dbm[i] - raw, cal.directivity_db[i], cal.budget.source_match > 0 ? 25 : 80);
        if (truth < classic.worst_db || truth > classic.best_db) ++classic_outside;
      }
    }
  }
  EXPECT_EQ(outside, 0) << "of " << points << " points";
  EXPECT_GT(classic_outside, 0) << "the classic bound should miss some points on this bench";
  std::printf("[ budget  ] %ld points: %ld outside the budget's interval, %ld outside the classic directivity bound\n",
              points, outside, classic_outside);
}

// A LOAD whose reflection cancels the leakage reads very low: the LOAD alone would claim a
// superb coupler. The bound adds the kit's LOAD residual, so it still covers the true leakage.
TEST(UncertaintyBudget, LoadCancellingTheLeakageCannotHideIt) {
  const Recipe r = plan_recipe();
  ImperfectBench b;
  b.eps_d = std::pow(10.0, -40.0 / 20);   // leakage as large as the LOAD's reflection
  b.delay_s = 0;
  b.sigma_db = 0;
  b.phase0 = kPi;                          // leakage = −Γ_LOAD: they cancel at the coupled port
  b.load_phase = 0;
  const auto traces = measure_standards(r, b);
  CalKit kit = bench_kit();
  kit.load = {LoadStep{6e9, 40}};
  const CalibrationRecord cal = build_calibration(r, traces, station_with(kit), "c", "2026-12-01T00:00:00Z");
  for (std::size_t i = 0; i < cal.budget.directivity_bound.size(); ++i) {
    EXPECT_LT(cal.budget.directivity_measured[i], 0.5 * b.eps_d) << "the LOAD reading should look too good here";
    EXPECT_GE(cal.budget.directivity_bound[i], b.eps_d) << "at point " << i;
  }
}

// Reading noise from repeated sweeps: differences of ±a give σ̂ = a/√2, raised to the upper 95 %
// confidence limit sqrt(n/χ²₀.₀₅(n)). χ²₀.₀₅(100) = 77.929 (lower-tail table of the chi-square
// distribution, NIST/SEMATECH e-Handbook of Statistical Methods §1.3.6.7.4; from memory), factor
// sqrt(100/77.929) = 1.1328.
TEST(UncertaintyBudget, ReadingNoiseIsMeasuredFromTheRepeats) {
  Recipe r = plan_recipe();
  r.segments = {Segment{860e6, 959e6, 100}};
  auto traces = testing_bench::standards(r, testing_bench::Bench{});
  auto& rep = traces["OPEN/repeat"];
  for (std::size_t i = 0; i < rep.size(); ++i) rep[i].raw_dbm += (i % 2 ? 0.1 : -0.1);
  const CalibrationRecord cal = build_calibration(r, traces, testing_bench::station(), "c", "2026-12-01T00:00:00Z");
  ASSERT_EQ(cal.budget.noise.size(), 1u);
  const SegmentNoise& n = cal.budget.noise[0];
  EXPECT_TRUE(n.measured);
  EXPECT_EQ(n.pairs, 100u);
  EXPECT_NEAR(n.high_level_db, 0.1 / std::sqrt(2.0) * 1.1328, 0.0005);
  // Without repeats: assumed, and the calibration says so.
  traces.erase("OPEN/repeat");
  const CalibrationRecord un = build_calibration(r, traces, testing_bench::station(), "c", "2026-12-01T00:00:00Z");
  EXPECT_FALSE(un.budget.noise[0].measured);
  bool said = false;
  for (const auto& w : un.warnings) said = said || w.find("reading noise not measured") != std::string::npos;
  EXPECT_TRUE(said);
}

// Source match: the fixture's figure, or the recipe's when that is worse (never the better one).
TEST(UncertaintyBudget, SourceMatchIsTheWorseOfFixtureAndRecipe) {
  Recipe r = plan_recipe();
  const auto traces = testing_bench::standards(r, testing_bench::Bench{});
  StationCapability st = testing_bench::station();   // fixture 30 dB
  r.source_match_db = 15;
  EXPECT_NEAR(build_calibration(r, traces, st, "c", "t").budget.source_match, rho_from_db(15), 1e-12);
  r.source_match_db = 40;
  EXPECT_NEAR(build_calibration(r, traces, st, "c", "t").budget.source_match, rho_from_db(30), 1e-12);
}

// Noise in dB grows as the level falls (a tone in additive noise): σ at a level 20 dB below
// the LOAD is larger than at the LOAD, and never below the high-level figure.
TEST(UncertaintyBudget, NoiseGrowsBelowTheLoadLevel) {
  UncertaintyBudget b;
  b.frequency_hz = {900e6};
  b.noise = {SegmentNoise{900e6, 900e6, 100, 0.02, 0.05, -70, true}};
  b.noise_floor_dbm = -200;
  EXPECT_NEAR(reading_sigma_db(b, 0, -70), 0.05, 1e-9);
  EXPECT_NEAR(reading_sigma_db(b, 0, -90), std::sqrt(0.02 * 0.02 + (0.05 * 0.05 - 0.02 * 0.02) * 100), 1e-9);
  EXPECT_NEAR(reading_sigma_db(b, 0, -10), 0.02, 1e-4);
  // The receiver floor sets a minimum: a tone 40 dB above it moves by 8.686·sqrt(1e-4/2) dB.
  b.noise = {SegmentNoise{900e6, 900e6, 100, 0, 0, -70, true}};
  b.noise_floor_dbm = -110;
  EXPECT_NEAR(reading_sigma_db(b, 0, -70), 20 / std::log(10.0) * std::sqrt(1e-4 / 2), 1e-6);
}


// The fast-capture frequency-offset term (MEASUREMENT.md §11): offset x the steeper chord slope
// to the neighbours. On a straight line it is the line's change over the offset exactly; at a
// dip (a "V") the steeper side sets it; at the ends only the one neighbour counts. The bound
// behind it is the chord-slope inequality of a convex function, (g(x) - g(0))/x nondecreasing
// in x (Hardy, Littlewood and Polya, Inequalities, ch. 3; from memory).
TEST(FrequencyOffset, TermIsTheOffsetTimesTheSteeperChordSlope) {
  const std::vector<double> f = {900e6, 900.5e6, 901e6, 901.5e6, 902e6};
  const std::vector<double> line = {-20, -21, -22, -23, -24};   // 2 dB per MHz
  for (std::size_t i = 0; i < f.size(); ++i) EXPECT_NEAR(frequency_offset_db(f, line, i, 0.25e6), 0.5, 1e-12) << i;
  const std::vector<double> vee = {-20, -22, -30, -23, -21};
  EXPECT_NEAR(frequency_offset_db(f, vee, 2, 0.25e6), 8.0 / 0.5e6 * 0.25e6, 1e-12);   // the steeper side: 8 dB
  EXPECT_NEAR(frequency_offset_db(f, vee, 0, 0.25e6), 1.0, 1e-12);                   // one neighbour at the end
  EXPECT_EQ(frequency_offset_db(f, vee, 2, 0), 0.0);                                 // a step sweep: no term
}

// A one-point budget with no error at all and no reading noise (k = 3), so a test sees only
// the term it adds.
UncertaintyBudget errorless_budget() {
  UncertaintyBudget b;
  b.coverage_factor = 3;
  b.noise_floor_dbm = -400;
  b.noise = {SegmentNoise{860e6, 970e6, 100, 0, 0, -60, true}};
  b.frequency_hz = {915e6};
  b.reference_error_low_db = {0};
  b.reference_error_high_db = {0};
  b.reference_noise_db = {0};
  b.directivity_bound = {0};
  b.directivity_measured = {0};
  b.load_residual = {0};
  return b;
}

// The term is bounded and enters as a worst case (MEASUREMENT.md §3.6): with no other error,
// a reading at RL 20 dB with 0.3 dB of offset term lies in [19.7, 20.3] dB, from RL = R - P
// (return loss from the reference, common practice, no source).
TEST(FrequencyOffset, BudgetAddsTheTermToTheBoundedInterval) {
  const UncertaintyBudget b = errorless_budget();
  const ReturnLossBounds plain = budget_bounds(b, 0, 0, -20);
  EXPECT_NEAR(plain.worst_db, 20, 1e-9);
  EXPECT_NEAR(plain.best_db, 20, 1e-9);
  const ReturnLossBounds with = budget_bounds(b, 0, 0, -20, 0.3);
  EXPECT_NEAR(with.worst_db, 19.7, 1e-9);
  EXPECT_NEAR(with.best_db, 20.3, 1e-9);
}

// A fast capture reads the bench and the unit at f + d, |d| up to half a bin, one d per capture
// (the source ramp and the receiver's dwell are locked; the crossing's place in the bin is set
// by the free-running ramp's phase: MEASUREMENT.md §11). Standards and units of the imperfect
// bench above, each captured with its own d: the fast recipe's budget (half a bin = 0.25 MHz for
// 221 points over 110 MHz) holds the true return loss at the plan frequency at every point, for
// a whip-like Q of 9 and a narrow part of Q 60, whose steep sides the same readings judged
// without the term miss (which is why the term is there).
TEST(FrequencyOffset, FastCaptureBoundsHoldTheTrueReturnLossAtThePlanFrequency) {
  Recipe r = plan_recipe();
  r.mode = SweepMode::fast_capture;
  const CalKit kit = bench_kit();
  const auto plan = plan_frequencies(r);
  std::mt19937_64 rng(11);
  std::uniform_real_distribution<double> half_bin(-0.25e6, 0.25e6);
  long points = 0, outside = 0, outside_without = 0;
  for (int trial = 0; trial < 12; ++trial) {
    ImperfectBench b;
    b.phase0 = 2 * kPi * trial / 12;
    b.load_phase = 2 * kPi * ((trial * 5) % 12) / 12;
    b.rng.seed(300 + trial);
    std::map<std::string, std::vector<Reading>> t;
    for (const char* name : {"OPEN", "SHORT", "LOAD", "OPEN/repeat", "LOAD/repeat"}) {
      const double d = half_bin(rng);
      const std::string s = name;
      for (double f : plan) {
        const double x = f + d;
        const cd g = s.rfind("OPEN", 0) == 0 ? b.open(x) : s == "SHORT" ? b.shrt(x) : b.load(x);
        t[s].push_back({f, b.read(x, g)});
      }
    }
    const CalibrationRecord cal = build_calibration(r, t, station_with(kit), "c", "2026-12-01T00:00:00Z");
    ASSERT_TRUE(cal.valid) << (cal.errors.empty() ? "" : cal.errors.front());
    ASSERT_DOUBLE_EQ(cal.budget.frequency_offset_hz, 0.25e6);
    CalibrationRecord without = cal;
    without.budget.frequency_offset_hz = 0;
    for (double f0 : {905e6, 915e6, 930e6}) {
      for (double q : {9.0, 60.0}) {
        const double d = half_bin(rng);
        std::vector<Reading> dut;
        for (double f : plan) dut.push_back({f, b.read(f + d, testing_bench::antenna(f + d, f0, q, 45))});
        const CalibratedTrace with_term = calibrate_points(cal, dut);
        const CalibratedTrace no_term = calibrate_points(without, dut);
        for (std::size_t i = 0; i < plan.size(); ++i) {
          const double truth = return_loss_from_gamma(std::abs(testing_bench::antenna(plan[i], f0, q, 45)));
          const PointResult& p = with_term.points[i];
          const PointResult& n = no_term.points[i];
          ++points;
          outside += truth < p.return_loss_worst_db - 1e-9 || truth > p.return_loss_best_db + 1e-9;
          outside_without += truth < n.return_loss_worst_db - 1e-9 || truth > n.return_loss_best_db + 1e-9;
        }
      }
    }
  }
  EXPECT_EQ(outside, 0) << "of " << points << " points";
  EXPECT_GT(outside_without, 0) << "without the term some points should fall outside";
  std::printf("[ offset  ] %ld points: %ld outside the fast budget's interval, %ld without the offset term\n", points,
              outside, outside_without);
}

// Noise can hide a slope: two readings 0.5 MHz apart with σ = 0.1 dB each differ by up to
// k·sqrt(2)·0.1 dB more or less than the true trace. The statistical part is
// offset·sqrt(σ_i² + σ_j²)/Δf (propagation of uncertainty for a difference, JCGM 100:2008 §5.1.2),
// the larger neighbour at each point, and nothing when there is no offset.
TEST(FrequencyOffset, NoisePartOfTheSlopeIsStatistical) {
  const std::vector<double> f = {900e6, 900.5e6, 901.5e6};
  const std::vector<double> sigma = {0.1, 0.1, 0.2};
  const std::vector<double> u = frequency_offset_sigma_db(f, sigma, 0.25e6);
  ASSERT_EQ(u.size(), 3u);
  EXPECT_NEAR(u[0], 0.25e6 * std::hypot(0.1, 0.1) / 0.5e6, 1e-12);
  // Middle point: neighbours 0.5 MHz (σ 0.1) and 1 MHz (σ 0.2) away; the first is larger.
  EXPECT_NEAR(u[1], std::max(std::hypot(0.1, 0.1) / 0.5e6, std::hypot(0.1, 0.2) / 1e6) * 0.25e6, 1e-12);
  EXPECT_NEAR(u[2], 0.25e6 * std::hypot(0.2, 0.1) / 1e6, 1e-12);
  for (double x : frequency_offset_sigma_db(f, sigma, 0)) EXPECT_EQ(x, 0.0);

  // In the interval it joins the reading noise before the coverage factor: with no other
  // noise, U = k·u.
  const UncertaintyBudget b = errorless_budget();
  const ReturnLossBounds with = budget_bounds(b, 0, 0, -20, 0, 0.1);
  EXPECT_NEAR(with.worst_db, 19.7, 1e-9);
  EXPECT_NEAR(with.best_db, 20.3, 1e-9);
}

// A step recipe's budget has no offset term.
TEST(FrequencyOffset, StepSweepBudgetHasNoOffset) {
  const Recipe r = plan_recipe();
  ASSERT_EQ(r.mode, SweepMode::step);
  ImperfectBench b;
  const CalibrationRecord cal = build_calibration(r, measure_standards(r, b), station_with(bench_kit()), "c",
                                                  "2026-12-01T00:00:00Z");
  EXPECT_EQ(cal.budget.frequency_offset_hz, 0.0);
}

}  // namespace
}  // namespace echoline::core
