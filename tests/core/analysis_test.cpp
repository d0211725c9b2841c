// Calibrated points, resonance, bandwidth and mask margins (daemon/core/analysis.hpp).
#include "daemon/core/analysis.hpp"

#include <cmath>
#include <functional>
#include <limits>

#include <gtest/gtest.h>

#include "daemon/core/rf_math.hpp"

namespace echoline::core {
namespace {

constexpr double kInf = std::numeric_limits<double>::infinity();

std::vector<PointResult> trace(double start, double step, int n, const std::function<double(double)>& rl,
                               double directivity_db = 30) {
  std::vector<PointResult> out;
  for (int i = 0; i < n; ++i) {
    PointResult p;
    p.frequency_hz = start + step * i;
    p.return_loss_db = rl(p.frequency_hz);
    ReturnLossBounds b = return_loss_bounds(p.return_loss_db, directivity_db, kInf);
    p.return_loss_worst_db = b.worst_db;
    p.return_loss_best_db = b.best_db;
    out.push_back(p);
  }
  return out;
}

// A parabola through three samples has its vertex found exactly (analytic geometry).
TEST(Analysis, ResonanceRefinementIsExactOnAParabola) {
  const double f0 = 914.37e6;
  auto pts = trace(860e6, 0.55e6, 201, [&](double f) {
    const double x = (f - f0) / 1e6;
    return 20.0 - 0.02 * x * x;
  });
  auto r = find_resonance(pts);
  ASSERT_TRUE(r);
  EXPECT_TRUE(r->refined);
  EXPECT_FALSE(r->at_edge);
  EXPECT_NEAR(r->frequency_hz, f0, 1.0);
  EXPECT_NEAR(r->depth_db, 20.0, 1e-9);
  // Bound interval (analysis.cpp, resonance_interval): where the best-case RL reaches the
  // worst-case RL of the peak sample. D = 30 dB, RL 20 dB: worst 17.6134 dB (computed
  // from the one-port model). Best-case RL = −20·log10(|Γ_m| − ρ_D) (§2 model) reaches it where
  // |Γ_m| = 10^(−17.6134/20) + 10^(−30/20), i.e. at RL_m = 15.743 dB: x = ±sqrt((20 − 15.743)/0.02)
  // MHz from f0, then widened by half the 0.55 MHz step. Linear interpolation between samples
  // costs far less than 0.05 MHz on this smooth trace.
  const double rl_edge = -20 * std::log10(std::pow(10.0, -17.6134 / 20) + std::pow(10.0, -30.0 / 20));
  EXPECT_NEAR(rl_edge, 15.743, 1e-3);   // computed: 0.131622 + 0.031623 = 0.163245
  const double half = std::sqrt((20.0 - rl_edge) / 0.02) * 1e6;
  const Band b = resonance_interval(pts, r->index);
  EXPECT_FALSE(b.low_open);
  EXPECT_FALSE(b.high_open);
  EXPECT_NEAR(b.low_hz, f0 - half - 0.275e6, 0.05e6);
  EXPECT_NEAR(b.high_hz, f0 + half + 0.275e6, 0.05e6);
  // find_resonance keeps the tighter smooth-error interval inside it (resonance_shift_test.cpp).
  EXPECT_GE(r->low_hz, b.low_hz);
  EXPECT_LE(r->high_hz, b.high_hz);
  EXPECT_LT(r->low_hz, f0);
  EXPECT_GT(r->high_hz, f0);
}

// A tilted dip: the bound interval is set by the bounds around the measured peak, not by the
// peak's position. RL = 20 − 0.05·x² − 0.25·x (x in MHz from 926 MHz) peaks at 923.5 MHz,
// 20.3125 dB deep (vertex of the parabola, analytic geometry).
TEST(Analysis, BoundIntervalOfATiltedDipContainsTheMeasuredPeak) {
  auto rl = [](double f) {
    const double x = (f - 926e6) / 1e6;
    return 20.0 - 0.05 * x * x - 0.25 * x;
  };
  auto pts = trace(860e6, 0.55e6, 201, rl, 35);
  auto r = find_resonance(pts);
  ASSERT_TRUE(r);
  EXPECT_NEAR(r->frequency_hz, 923.5e6, 1.0);
  EXPECT_LT(r->low_hz, r->frequency_hz);
  EXPECT_GT(r->high_hz, r->frequency_hz);
  // Each edge's best-case RL equals the peak's worst-case RL (the interval's definition), within
  // what half a point step of widening and linear interpolation move it.
  const double level = pts[r->index].return_loss_worst_db;
  auto best_at = [&](double f) { return return_loss_bounds(rl(f), 35, kInf).best_db; };
  const Band b = resonance_interval(pts, r->index);
  EXPECT_NEAR(best_at(b.low_hz + 0.275e6), level, 0.05);
  EXPECT_NEAR(best_at(b.high_hz - 0.275e6), level, 0.05);
  // Inside the interval the best case clears the level; half a step beyond each edge it does not.
  EXPECT_GT(best_at(r->frequency_hz), level);
  EXPECT_LT(best_at(b.low_hz - 0.3e6), level);
  EXPECT_LT(best_at(b.high_hz + 0.3e6), level);
  EXPECT_GE(r->low_hz, b.low_hz);
  EXPECT_LE(r->high_hz, b.high_hz);
}

// The interval reaching the sweep edge is open on that side.
TEST(Analysis, BoundIntervalReachingTheSweepEdgeIsOpen) {
  auto pts = trace(860e6, 1e6, 50, [](double f) { return std::max(0.5, 30.0 - (f - 860e6) / 1e6); });
  auto r = find_resonance(pts);
  ASSERT_TRUE(r);
  EXPECT_TRUE(r->at_edge);
  EXPECT_TRUE(r->low_open);
  EXPECT_DOUBLE_EQ(r->low_hz, 860e6);
  EXPECT_FALSE(r->high_open);
  // D = 30 dB, RL 30 dB: worst 23.979 dB (computed from the one-port model); the best case falls to it
  // between RL_m 20 dB (best 23.302) and 21 dB: between 869 and 870 MHz, plus half a step.
  EXPECT_GT(r->high_hz, 869.5e6);
  EXPECT_LT(r->high_hz, 870.5e6);
}

// Two dips: one reading 20 dB at 915 MHz and one reading 16 dB at 950 MHz behind a 28 dB coupler
// (|d| 0.04). The second one's best case (|Γ| 0.158 − 0.04: 18.6 dB) reaches the first one's worst
// case (0.1 + 0.04: 17.1 dB), so the true maximum may be at 950 MHz: the interval must hold both,
// and the shift bound, which follows one dip, must not narrow it (the one-port bounds of
// MEASUREMENT.md §3.6; the numbers from rf_math).
TEST(Analysis, ASecondDipThatMayBeDeeperIsInsideTheResonanceInterval) {
  auto dip = [](double f, double f0, double depth) {
    const double x = (f - f0) / 6e6;
    return depth / (1 + x * x);
  };
  auto pts = trace(860e6, 0.5e6, 221, [&](double f) { return std::max({3.0, dip(f, 915e6, 20), dip(f, 950e6, 16)}); }, 28);
  auto r = find_resonance(pts);
  ASSERT_TRUE(r);
  EXPECT_NEAR(r->frequency_hz, 915e6, 0.5e6);
  EXPECT_TRUE(another_dip_qualifies(pts, r->index));
  EXPECT_LE(r->low_hz, 915e6);
  EXPECT_GE(r->high_hz, 950e6) << "the interval stops at " << r->high_hz / 1e6 << " MHz";
  EXPECT_FALSE(r->shift_bound_used);
  // A second dip too shallow to matter (10 dB: best case 12.0 dB, under 17.1 dB) leaves it alone.
  auto one = trace(860e6, 0.5e6, 221, [&](double f) { return std::max({3.0, dip(f, 915e6, 20), dip(f, 950e6, 10)}); }, 28);
  auto r1 = find_resonance(one);
  ASSERT_TRUE(r1);
  EXPECT_FALSE(another_dip_qualifies(one, r1->index));
  EXPECT_LT(r1->high_hz, 935e6);
}

// Unequal spacing around the maximum (a joint between segments) still gives the exact vertex.
TEST(Analysis, ParabolaVertexWithUnequalSpacing) {
  auto y = [](double x) { return 5.0 - 3.0 * (x - 1.3) * (x - 1.3); };
  auto v = parabola_vertex(0.5, y(0.5), 1.0, y(1.0), 2.2, y(2.2));
  ASSERT_TRUE(v);
  EXPECT_NEAR(v->x, 1.3, 1e-12);
  EXPECT_NEAR(v->y, 5.0, 1e-12);
  EXPECT_FALSE(parabola_vertex(0, 1, 1, 1, 2, 1));   // flat: no maximum
  EXPECT_FALSE(parabola_vertex(0, 2, 1, 1, 2, 2));   // opens upward
}

TEST(Analysis, ResonanceOnTheSweepEdgeIsNotRefined) {
  auto pts = trace(860e6, 1e6, 50, [](double f) { return 30.0 - (f - 860e6) / 1e6; });
  auto r = find_resonance(pts);
  ASSERT_TRUE(r);
  EXPECT_TRUE(r->at_edge);
  EXPECT_FALSE(r->refined);
  EXPECT_EQ(r->index, 0u);
  EXPECT_DOUBLE_EQ(r->frequency_hz, 860e6);
}

// Linear interpolation at both crossings: on a V-shaped (piecewise linear) dip the crossings are
// exact: RL = 20 − 0.5 dB/MHz·|f − 915 MHz| crosses 10 dB at 895 and 935 MHz.
TEST(Analysis, BandwidthCrossingsAreInterpolated) {
  auto pts = trace(860e6, 0.55e6, 201, [](double f) { return 20.0 - 0.5 * std::fabs(f - 915e6) / 1e6; });
  auto r = find_resonance(pts);
  ASSERT_TRUE(r);
  auto band = find_band(pts, r->index, 10.0);
  ASSERT_TRUE(band);
  EXPECT_NEAR(band->low_hz, 895e6, 1e-3);
  EXPECT_NEAR(band->high_hz, 935e6, 1e-3);
  EXPECT_NEAR(band->width_hz(), 40e6, 1e-3);
  EXPECT_FALSE(band->low_open);
  EXPECT_FALSE(band->high_open);
  // Worst-case trace is narrower, best-case wider; their edges are samples (what the samples
  // prove), not interpolated crossings.
  auto worst = find_band(pts, r->index, 10.0, TraceValue::worst);
  auto best = find_band(pts, r->index, 10.0, TraceValue::best);
  ASSERT_TRUE(worst && best);
  EXPECT_LT(worst->width_hz(), band->width_hz());
  EXPECT_GT(best->width_hz(), band->width_hz());
  for (double edge : {worst->low_hz, worst->high_hz, best->low_hz, best->high_hz}) {
    const double steps = (edge - 860e6) / 0.55e6;
    EXPECT_NEAR(steps, std::round(steps), 1e-6) << edge;
  }
  EXPECT_DOUBLE_EQ(crossing_hz(1.0, 12.0, 2.0, 8.0, 10.0), 1.5);
}

TEST(Analysis, BandReachingTheSweepEdgeIsOpen) {
  auto pts = trace(900e6, 1e6, 21, [](double f) { return 15.0 - 0.5 * std::fabs(f - 905e6) / 1e6; });
  auto r = find_resonance(pts);
  auto band = find_band(pts, r->index, 10.0);
  ASSERT_TRUE(band);
  EXPECT_TRUE(band->low_open);
  EXPECT_DOUBLE_EQ(band->low_hz, 900e6);
  EXPECT_FALSE(band->high_open);
  EXPECT_NEAR(band->high_hz, 915e6, 1e-3);
  EXPECT_FALSE(find_band(pts, r->index, 16.0));   // dip never reaches the threshold
}

TEST(Analysis, MaskMarginsPerSegment) {
  auto pts = trace(900e6, 1e6, 31, [](double f) { return 20.0 - 0.5 * std::fabs(f - 915e6) / 1e6; });
  auto m = mask_margins(pts, {LimitSegment{902e6, 928e6, 10}, LimitSegment{929e6, 930e6, 5}});
  ASSERT_EQ(m.size(), 2u);
  EXPECT_EQ(m[0].point_count, 27u);
  EXPECT_NEAR(m[0].measured_db, 20 - 0.5 * 13 - 10, 1e-9);   // at 902 and 928 MHz
  EXPECT_LT(m[0].worst_db, m[0].measured_db);
  EXPECT_GT(m[0].best_db, m[0].measured_db);
  EXPECT_EQ(m[1].point_count, 2u);
  EXPECT_NEAR(m[1].measured_db, 20 - 0.5 * 15 - 5, 1e-9);
  EXPECT_DOUBLE_EQ(m[1].measured_at_hz, 930e6);
}

// RL = reference − P_dut; a reading above the reference is clamped to 0 dB and counted. With a
// budget of directivity alone (no reference error, noise or source match) the bounds are the
// classic scalar ones: |Γ| ± ρ_D.
TEST(Analysis, CalibratePointsUsesReferenceAndDirectivity) {
  CalibrationRecord cal;
  cal.reference_dbm = {-31.0, -31.0, -31.0};
  cal.directivity_db = {30, 30, 40};
  UncertaintyBudget& b = cal.budget;
  b.frequency_hz = {900e6, 901e6, 902e6};
  b.reference_error_low_db = b.reference_error_high_db = b.reference_noise_db = {0, 0, 0};
  b.directivity_bound = b.directivity_measured = {rho_from_db(30), rho_from_db(30), rho_from_db(40)};
  b.load_residual = {0, 0, 0};
  b.noise = {SegmentNoise{900e6, 902e6, 3, 0, 0, -70, true}};
  std::vector<Reading> dut = {{900e6, -51.0}, {901e6, -30.5}, {902e6, -61.0}};
  CalibratedTrace t = calibrate_points(cal, dut);
  ASSERT_EQ(t.points.size(), 3u);
  EXPECT_NEAR(t.points[0].return_loss_db, 20.0, 1e-12);
  EXPECT_NEAR(t.points[0].return_loss_worst_db, 17.6134, 1e-4);   // one-port model, D 30, RL 20
  EXPECT_NEAR(t.points[0].return_loss_best_db, 23.3018, 1e-4);
  EXPECT_EQ(t.points[1].return_loss_db, 0.0);
  EXPECT_EQ(t.clamped_points, 1u);
  EXPECT_NEAR(t.points[2].return_loss_worst_db, 27.6134, 1e-4);   // Hiebel: D 40, RL 30
}

}  // namespace
}  // namespace echoline::core
