// Mask prediction (daemon/core/mask_prediction.hpp): the readings a mask under guarded
// acceptance passes and fails on a station, and the share of a production spread it leaves
// inconclusive.
#include "daemon/core/mask_prediction.hpp"

#include <cmath>
#include <cstdio>

#include <gtest/gtest.h>

#include "daemon/core/rf_math.hpp"
#include "tests/core/synthetic_bench.hpp"

namespace echoline::core {
namespace {

using namespace testing_bench;

// The bench without source match or receiver floor: only the error radius, the kit's reference
// ripple and the assumed 0.05 dB reading noise remain.
StationCapability clean_station() {
  StationCapability s = station();
  s.source_match_db = 200;
  s.noise_floor_dbm = -250;
  return s;
}

Recipe one_band_recipe() {
  Recipe r = whip_recipe();
  r.segments = {Segment{860e6, 970e6, 221}};
  r.limits.resonance_min_hz.reset();
  r.limits.resonance_max_hz.reset();
  r.coverage_factor = 3;
  return r;
}

// A Q-9 whip 20 dB deep whose resonance spreads by 5.9 MHz (s.d.) around the trim target.
Recipe spread_recipe() {
  Recipe r = one_band_recipe();
  r.nominal.q = 9;
  r.nominal.depth_db = 20;
  r.nominal.resonance_sd_hz = 5.9e6;
  return r;
}

// The statistical part the prediction adds: k·sqrt(σ² + σ²/2) for a reading and the mean of two.
double assumed_noise_db(double k) { return k * std::sqrt(0.05 * 0.05 + 0.05 * 0.05 / 2); }

// A reading of 10 dB return loss behind a 30 dB coupler is 20 dB above the leakage, so the true
// value lies within 20·log10(1 ± 10^(−20/20)) = +0.83/−0.92 dB of it (the scalar mismatch
// uncertainty; common practice, no source). Turned round for a 10 dB limit: a reading passes
// from −20·log10(0.31623 − 0.03162) = 10.915 dB and fails below −20·log10(0.31623 + 0.03162)
// = 9.172 dB, each moved by the noise and the reference ripple of an ideal kit.
TEST(MaskPrediction, GuardBandIsTheScalarMismatchBound) {
  const Recipe r = one_band_recipe();
  const StationCapability st = clean_station();
  const double e = rho_from_db(30);
  const auto p = predict_mask(r, st, e, e);
  ASSERT_TRUE(p);
  ASSERT_EQ(p->guards.size(), 1u);
  // Ideal OPEN and SHORT: only the second-order ripple w²/(2(1 − w)), w = E, is left (MEASUREMENT.md §3.2).
  const double ripple_db = 20 * std::log10(std::exp(1.0)) * e * e / (2 * (1 - e));
  const double u = assumed_noise_db(3);
  EXPECT_NEAR(p->guards[0].pass_reading_db, 10.915 + u + ripple_db, 0.005);
  EXPECT_NEAR(p->guards[0].fail_reading_db, 9.172 - u - ripple_db, 0.005);
  EXPECT_FALSE(p->have_unit);   // no nominal unit: thresholds only
}

// An error radius larger than the limit's |Γ| (0.316 at 10 dB): no reading can pass.
TEST(MaskPrediction, NoReadingPassesWhenTheErrorRadiusExceedsTheLimit) {
  const auto p = predict_mask(one_band_recipe(), clean_station(), 0.35, 0.35);
  ASSERT_TRUE(p);
  EXPECT_TRUE(std::isinf(p->guards[0].pass_reading_db));
}

// A one-frequency mask at 915 MHz and a matched series resonance (no leakage): a unit passes
// exactly when its resonance lies in an interval around 915 MHz. With the spread's standard
// deviation set to that interval's half-width / 1.96, the passing share is P(|Z| <= 1.96) = 0.950
// (standard normal table; any statistics text).
TEST(MaskPrediction, PassingShareOfANormalSpread) {
  Recipe r = one_band_recipe();
  r.limits.mask = {LimitSegment{915e6, 915e6, 10}};
  const StationCapability st = clean_station();
  const double e = 1e-4;
  const auto thresholds = predict_mask(r, st, e, 0.0);
  ASSERT_TRUE(thresholds);
  const double g = std::pow(10.0, -thresholds->guards[0].pass_reading_db / 20);
  const double q = 9, f = 915e6;
  // |Γ| = x/sqrt(4 + x²) for z = 1 + jx: |Γ| = g at x = 2g/sqrt(1 − g²); x = Q(f/f_r − f_r/f).
  const double x = 2 * g / std::sqrt(1 - g * g);
  auto root = [&](double xs) { return f * (-xs / (2 * q) + std::sqrt(1 + xs * xs / (4 * q * q))); };
  const double lo = root(x), hi = root(-x);
  ASSERT_LT(lo, f);
  ASSERT_GT(hi, f);
  r.nominal.q = q;
  r.nominal.center_hz = (lo + hi) / 2;
  r.nominal.resonance_sd_hz = (hi - lo) / 2 / 1.959964;
  const auto p = predict_mask(r, st, e, 0.0);
  ASSERT_TRUE(p && p->have_unit && p->of_all_units);
  EXPECT_NEAR(p->pass_fraction, 0.950, 0.004);
  EXPECT_NEAR(p->pass_fraction + p->inconclusive_fraction + p->fail_fraction, 1.0, 1e-9);
}

// A better coupler leaves fewer units undecided, and the directivity the prediction asks for
// does bring the share to 5 % when the station has it.
TEST(MaskPrediction, DirectivityForFivePercentDeliversIt) {
  const Recipe r = spread_recipe();
  StationCapability st = clean_station();
  st.source_match_db = 25;
  st.directivity_db = 25;
  const auto p25 = predict_mask(r, st);
  st.directivity_db = 35;
  const auto p35 = predict_mask(r, st);
  ASSERT_TRUE(p25 && p35 && p25->have_unit);
  EXPECT_GT(p25->inconclusive_fraction, 0.10);
  EXPECT_LT(p35->inconclusive_fraction, p25->inconclusive_fraction);
  ASSERT_TRUE(p25->directivity_for_5_percent_db) << p25->basis;
  st.directivity_db = *p25->directivity_for_5_percent_db + 0.05;
  const auto p5 = predict_mask(r, st);
  ASSERT_TRUE(p5);
  EXPECT_LE(p5->inconclusive_fraction, 0.05);
}

// The offset pair moves the thresholds onto the unit's own return loss (MEASUREMENT.md §12): the
// guard band behind a 25 dB coupler narrows from the leakage (about 2·|E_D| in |Γ|) to the
// pair's second-order terms, and the predicted inconclusive share falls with it.
TEST(MaskPrediction, TheOffsetPairNarrowsTheGuardBand) {
  Recipe r = spread_recipe();
  StationCapability st = clean_station();
  st.source_match_db = 25;
  st.directivity_db = 25;
  const auto one = predict_mask(r, st);
  st.kit.offset_line = quarter_wave_line(39);
  r.offset_pair = true;
  const auto pair = predict_mask(r, st);
  ASSERT_TRUE(one && pair && one->have_unit && pair->have_unit);
  ASSERT_EQ(pair->guards.size(), one->guards.size());
  const MaskGuard& g1 = one->guards.front();
  const MaskGuard& g2 = pair->guards.front();
  // 10 dB limit: one reading passes from about 12.4 dB behind 25 dB (|Γ| 0.316 − 0.056 − ...);
  // the pair from within a dB of the limit.
  EXPECT_LT(g2.pass_reading_db - g2.limit_db, 1.0) << pair->basis;
  EXPECT_GT(g1.pass_reading_db - g1.limit_db, 1.5) << one->basis;
  EXPECT_GT(g2.fail_reading_db, g1.fail_reading_db);
  EXPECT_LT(pair->inconclusive_fraction, 0.5 * one->inconclusive_fraction);
  EXPECT_NE(pair->basis.find("offset pair"), std::string::npos) << pair->basis;
  std::printf("guard band behind 25 dB: one reading %.2f-%.2f dB, offset pair %.2f-%.2f dB; inconclusive %.1f %% -> %.1f %%\n",
              g1.fail_reading_db, g1.pass_reading_db, g2.fail_reading_db, g2.pass_reading_db,
              100 * one->inconclusive_fraction, 100 * pair->inconclusive_fraction);
}

// recipe check warns when the mask will leave more than a tenth of the units undecided, names
// the reading needed and the directivity that would help; a good coupler gets no warning.
TEST(MaskPrediction, RecipeCheckWarnsOnAStationThatCannotDecideTheMask) {
  const Recipe r = spread_recipe();
  StationCapability st = station();
  st.directivity_db = 25;
  bool warned = false;
  for (const CheckFinding& f : check_recipe(r, st)) {
    if (f.key == "/limits/mask/0" && f.message.find("will come out inconclusive") != std::string::npos) {
      warned = true;
      EXPECT_NE(f.message.find("only when it reads at least"), std::string::npos) << f.message;
      EXPECT_NE(f.message.find("dB directivity would bring it to 5 %"), std::string::npos) << f.message;
    }
  }
  EXPECT_TRUE(warned);
  st.directivity_db = 45;
  for (const CheckFinding& f : check_recipe(r, st)) {
    EXPECT_EQ(f.message.find("will come out inconclusive"), std::string::npos) << f.message;
  }
}

}  // namespace
}  // namespace echoline::core
