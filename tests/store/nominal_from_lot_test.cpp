// Nominal unit from a lot (daemon/store/nominal_from_lot.hpp): which runs count, the medians and
// the spread, and the recipe text.
#include "daemon/store/nominal_from_lot.hpp"

#include <cmath>

#include <gtest/gtest.h>

namespace echoline::store {
namespace {

core::RunResult run(const std::string& serial, core::Verdict v, double f0, double depth, double bw,
                    const std::string& started) {
  core::RunResult r;
  r.run_id = serial + "-" + started;
  r.serial = serial;
  r.verdict = v;
  r.started_utc = started;
  r.metrics.resonance_hz = f0;
  r.metrics.depth_db = depth;
  r.metrics.bandwidth_hz = bw;
  return r;
}

// Units A (pass), B (inconclusive, then retested to pass), C (inconclusive), D (fail) and E
// (aborted): A, B's retest and C count; D and E do not, nor B's first run.
TEST(NominalFromLot, GoodAndUndecidedUnitsGiveMediansAndSpread) {
  using core::Verdict;
  const std::vector<core::RunResult> runs = {
      run("A", Verdict::pass, 914e6, 20, 70e6, "2026-12-01T10:00:00Z"),
      run("B", Verdict::inconclusive, 990e6, 5, 10e6, "2026-12-01T10:01:00Z"),
      run("B", Verdict::pass, 916e6, 24, 80e6, "2026-12-01T10:02:00Z"),
      run("C", Verdict::inconclusive, 915e6, 12, 90e6, "2026-12-01T10:03:00Z"),
      run("D", Verdict::fail, 880e6, 6, 20e6, "2026-12-01T10:04:00Z"),
      run("E", Verdict::aborted, 700e6, 1, 1e6, "2026-12-01T10:05:00Z"),
  };
  const NominalFromLot n = nominal_from_lot(runs);
  EXPECT_EQ(n.units, 3);
  ASSERT_TRUE(n.bandwidth_hz && n.depth_db && n.resonance_sd_hz);
  EXPECT_DOUBLE_EQ(*n.bandwidth_hz, 80e6);   // median of 70, 80, 90 MHz
  EXPECT_DOUBLE_EQ(*n.depth_db, 20);         // median of 20, 24, 12 dB
  // Sample standard deviation (n − 1) of 914, 916, 915 MHz: sqrt((1 + 1 + 0)/2) = 1 MHz
  // (elementary statistics).
  EXPECT_NEAR(*n.resonance_sd_hz, 1e6, 1e-3);
  EXPECT_EQ(n.snippet, R"("nominal_unit": { "bandwidth_hz": "80 MHz", "depth_db": 20.0, "resonance_sd_hz": "1 MHz" })");
}

// A spread under 1 MHz is written in kHz, not rounded to "0.00 MHz" (which the recipe loader
// would read as no spread at all): 914.000, 914.004, 914.002 MHz have a sample s.d. of 2 kHz.
TEST(NominalFromLot, ASmallSpreadKeepsItsDigits) {
  using core::Verdict;
  const NominalFromLot n = nominal_from_lot({run("A", Verdict::pass, 914.000e6, 20, 70e6, "2026-12-01T10:00:00Z"),
                                             run("B", Verdict::pass, 914.004e6, 20, 70e6, "2026-12-01T10:01:00Z"),
                                             run("C", Verdict::pass, 914.002e6, 20, 70e6, "2026-12-01T10:02:00Z")});
  ASSERT_TRUE(n.resonance_sd_hz);
  EXPECT_NEAR(*n.resonance_sd_hz, 2e3, 1e-3);
  EXPECT_NE(n.snippet.find(R"("resonance_sd_hz": "2 kHz")"), std::string::npos) << n.snippet;
}

// One unit gives no spread; a lot with nothing passed or undecided gives no text at all.
TEST(NominalFromLot, TooFewUnitsSayLess) {
  using core::Verdict;
  const NominalFromLot one = nominal_from_lot({run("A", Verdict::pass, 914e6, 20, 70e6, "2026-12-01T10:00:00Z")});
  EXPECT_FALSE(one.resonance_sd_hz);
  EXPECT_EQ(one.snippet, R"("nominal_unit": { "bandwidth_hz": "70 MHz", "depth_db": 20.0 })");
  const NominalFromLot none = nominal_from_lot({run("D", Verdict::fail, 880e6, 6, 20e6, "2026-12-01T10:04:00Z")});
  EXPECT_EQ(none.units, 0);
  EXPECT_TRUE(none.snippet.empty());
}

// A median deeper than the recipe loader takes (1 to 80 dB) is written as 80 dB, so the pasted
// text loads.
TEST(NominalFromLot, DepthStaysInsideWhatARecipeTakes) {
  const NominalFromLot n = nominal_from_lot({run("A", core::Verdict::pass, 914e6, 92, 70e6, "2026-12-01T10:00:00Z")});
  ASSERT_TRUE(n.depth_db);
  EXPECT_DOUBLE_EQ(*n.depth_db, 92);
  EXPECT_NE(n.snippet.find("\"depth_db\": 80.0"), std::string::npos) << n.snippet;
}

// A band that reaches the end of the sweep measures only part of the dip: that bandwidth is a
// lower bound and stays out of the median; when every band is clipped none is suggested.
TEST(NominalFromLot, BandwidthClippedAtTheSweepEndIsLeftOut) {
  auto swept = [](core::RunResult r, double band_low, double band_high) {
    for (double f = 860e6; f <= 970e6 + 1; f += 0.55e6) r.points.push_back(core::PointResult{f, -20, 15, 14, 16});
    r.metrics.band_low_hz = band_low;
    r.metrics.band_high_hz = band_high;
    return r;
  };
  using core::Verdict;
  const std::vector<core::RunResult> runs = {
      swept(run("A", Verdict::pass, 914e6, 20, 70e6, "2026-12-01T10:00:00Z"), 880e6, 950e6),
      swept(run("B", Verdict::pass, 916e6, 20, 90e6, "2026-12-01T10:01:00Z"), 880e6, 970e6),   // reaches the top
      swept(run("C", Verdict::pass, 912e6, 20, 100e6, "2026-12-01T10:02:00Z"), 860e6, 960e6),  // reaches the bottom
  };
  const NominalFromLot n = nominal_from_lot(runs);
  EXPECT_EQ(n.units, 3);
  EXPECT_EQ(n.bandwidth_clipped, 2);
  ASSERT_TRUE(n.bandwidth_hz);
  EXPECT_DOUBLE_EQ(*n.bandwidth_hz, 70e6);   // A alone, not the median of 70, 90, 100 MHz
  const NominalFromLot all = nominal_from_lot({runs[1], runs[2]});
  EXPECT_EQ(all.bandwidth_clipped, 2);
  EXPECT_FALSE(all.bandwidth_hz);
  EXPECT_EQ(all.snippet.find("bandwidth_hz"), std::string::npos) << all.snippet;
}

}  // namespace
}  // namespace echoline::store
