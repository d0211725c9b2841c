// Reflection arithmetic against published tables (daemon/core/rf_math.hpp).
#include "daemon/core/rf_math.hpp"

#include <cmath>
#include <limits>

#include <gtest/gtest.h>

namespace echoline::core {
namespace {

constexpr double kInf = std::numeric_limits<double>::infinity();

// M/A-COM (AMP) "VSWR, Return Loss and Transmission Loss vs. Transmitted Power", V2.00
// (textbook; Pozar, Microwave Engineering ch. 2 [memory]): VSWR 1.5 <-> RL 13.98 dB <-> |Γ| 0.2 <-> transmission loss 0.177 dB.
// Exact fractions: |Γ| = 1/5, RL = 20·log10(5), ML = -10·log10(24/25).
TEST(RfMath, Vswr15MatchesMacomTable) {
  EXPECT_NEAR(gamma_from_vswr(1.5), 0.2, 1e-15);
  EXPECT_NEAR(return_loss_from_vswr(1.5), 20 * std::log10(5.0), 1e-12);
  EXPECT_NEAR(return_loss_from_vswr(1.5), 13.98, 0.005);
  EXPECT_NEAR(mismatch_loss_from_gamma(0.2), -10 * std::log10(24.0 / 25.0), 1e-12);
  EXPECT_NEAR(mismatch_loss_from_gamma(0.2), 0.177, 0.0005);
  EXPECT_NEAR(vswr_from_gamma(0.2), 1.5, 1e-12);
}

// Same table: VSWR 2.0 <-> 9.54 dB <-> 0.333 <-> 0.512 dB; |Γ| = 1/3, RL = 20·log10(3).
TEST(RfMath, Vswr2MatchesMacomTable) {
  EXPECT_NEAR(gamma_from_vswr(2.0), 1.0 / 3.0, 1e-15);
  EXPECT_NEAR(return_loss_from_vswr(2.0), 20 * std::log10(3.0), 1e-12);
  EXPECT_NEAR(return_loss_from_vswr(2.0), 9.542425, 1e-6);
  EXPECT_NEAR(mismatch_loss_from_return_loss(20 * std::log10(3.0)), -10 * std::log10(8.0 / 9.0), 1e-12);
  EXPECT_NEAR(mismatch_loss_from_gamma(1.0 / 3.0), 0.512, 0.0005);
  EXPECT_NEAR(vswr_from_return_loss(9.542425094393249), 2.0, 1e-12);
}

// Exact fractions (computed): VSWR 3 -> 1/2, 5 -> 2/3, 10 -> 9/11, 1.05 -> 1/41,
// 1.1 -> 1/21, 1.2 -> 1/11 (|Γ| = (S-1)/(S+1)); M/A-COM rows 3.0 -> 6.0 dB / 1.249 dB,
// 5.0 -> 3.5 dB / 2.553 dB.
TEST(RfMath, ExactFractionsAndTableRows) {
  EXPECT_NEAR(gamma_from_vswr(3), 0.5, 1e-15);
  EXPECT_NEAR(gamma_from_vswr(5), 2.0 / 3.0, 1e-15);
  EXPECT_NEAR(gamma_from_vswr(10), 9.0 / 11.0, 1e-15);
  EXPECT_NEAR(gamma_from_vswr(1.05), 1.0 / 41.0, 1e-15);
  EXPECT_NEAR(gamma_from_vswr(1.1), 1.0 / 21.0, 1e-15);
  EXPECT_NEAR(gamma_from_vswr(1.2), 1.0 / 11.0, 1e-15);
  EXPECT_NEAR(return_loss_from_vswr(3), 20 * std::log10(2.0), 1e-12);
  EXPECT_NEAR(mismatch_loss_from_gamma(0.5), 1.249, 0.0005);
  EXPECT_NEAR(return_loss_from_vswr(5), 3.5, 0.05);
  EXPECT_NEAR(mismatch_loss_from_gamma(2.0 / 3.0), 2.553, 0.0005);
}

// radio-electronics.com VSWR / return loss table (reverse check):
// RL 10 -> 1.925 / 0.316, RL 14 -> 1.499 / 0.200, RL 20 -> 1.222 / 0.100, RL 30 -> 1.065 / 0.032.
TEST(RfMath, ReturnLossToVswrMatchesPublishedTable) {
  EXPECT_NEAR(vswr_from_return_loss(10), 1.925, 0.0005);
  EXPECT_NEAR(gamma_from_return_loss(10), 0.316, 0.0005);
  EXPECT_NEAR(vswr_from_return_loss(14), 1.499, 0.0005);
  EXPECT_NEAR(vswr_from_return_loss(20), 1.222, 0.0005);
  EXPECT_NEAR(gamma_from_return_loss(20), 0.1, 1e-15);
  EXPECT_NEAR(vswr_from_return_loss(30), 1.065, 0.0005);
}

// Edge cases (follow from the formulas): |Γ| = 0 -> VSWR 1, RL +inf, ML 0; |Γ| = 1 -> VSWR inf, RL 0, ML inf.
TEST(RfMath, EdgeCasesOfPerfectMatchAndTotalReflection) {
  EXPECT_EQ(return_loss_from_gamma(0), kInf);
  EXPECT_EQ(vswr_from_gamma(0), 1.0);
  EXPECT_EQ(mismatch_loss_from_gamma(0), 0.0);
  EXPECT_EQ(gamma_from_return_loss(kInf), 0.0);
  EXPECT_EQ(return_loss_from_gamma(1), 0.0);
  EXPECT_EQ(vswr_from_gamma(1), kInf);
  EXPECT_EQ(mismatch_loss_from_gamma(1), kInf);
  EXPECT_EQ(gamma_from_vswr(kInf), 1.0);
}

// Common practice: |Γ| > 1 cannot occur for a passive load; noisy scalar data is clamped and flagged.
TEST(RfMath, GammaAboveOneIsClampedAndFlagged) {
  ClampedGamma c = clamp_gamma(1.2);
  EXPECT_TRUE(c.clamped);
  EXPECT_EQ(c.value, 1.0);
  EXPECT_FALSE(clamp_gamma(0.5).clamped);
  EXPECT_TRUE(clamp_gamma(-0.1).clamped);
  EXPECT_EQ(return_loss_from_gamma(1.3), 0.0);
  EXPECT_EQ(gamma_from_return_loss(-2), 1.0);
  ReturnLossBounds b = return_loss_bounds(-0.5, 30, kInf);   // reading 0.5 dB above the reference
  EXPECT_TRUE(b.clamped);
  EXPECT_EQ(b.worst_db, 0.0);
  EXPECT_GT(b.best_db, 0.0);
}

// Grid computed from the one-port error model (common practice; formula from
// memory); worst / best true RL, 3 decimals, ∞ as kInf.
TEST(RfMath, DirectivityBoundsMatchReferenceGrid) {
  struct Row { double d, rl, worst, best; };
  const Row rows[] = {
      {20, 10, 7.613, 13.302}, {20, 15, 11.124, 22.177}, {20, 20, 13.979, kInf}, {20, 25, 16.124, kInf},
      {20, 30, 17.613, kInf},  {25, 10, 8.578, 11.701},  {25, 15, 12.613, 18.302}, {25, 20, 16.124, 27.177},
      {25, 25, 18.979, kInf},  {25, 30, 21.124, kInf},   {30, 10, 9.172, 10.915}, {30, 15, 13.578, 16.701},
      {30, 20, 17.613, 23.302}, {30, 25, 21.124, 32.177}, {30, 30, 23.979, kInf}, {35, 10, 9.525, 10.503},
      {35, 15, 14.172, 15.915}, {35, 20, 18.578, 21.701}, {35, 25, 22.613, 28.302}, {35, 30, 26.124, 37.177},
      {40, 10, 9.730, 10.279}, {40, 15, 14.525, 15.503}, {40, 20, 19.172, 20.915}, {40, 25, 23.578, 26.701},
      {40, 30, 27.613, 33.302}, {45, 10, 9.847, 10.156}, {45, 15, 14.730, 15.279}, {45, 20, 19.525, 20.503},
      {45, 25, 24.172, 25.915}, {45, 30, 28.578, 31.701},
  };
  for (const Row& r : rows) {
    SCOPED_TRACE(testing::Message() << "D=" << r.d << " RL=" << r.rl);
    ReturnLossBounds b = return_loss_bounds(r.rl, r.d, kInf);
    EXPECT_NEAR(b.worst_db, r.worst, 0.0006);
    if (std::isinf(r.best)) {
      EXPECT_EQ(b.best_db, kInf);
    } else {
      EXPECT_NEAR(b.best_db, r.best, 0.0006);
    }
    EXPECT_FALSE(b.clamped);
  }
}

// Worked example (computed): measured 20 dB with 30 dB directivity -> 17.6134 / 23.3018 dB,
// and Hiebel's D = 40 dB, RL = 30 dB example (same 10 dB margin, same bounds shifted by 10 dB).
TEST(RfMath, DirectivityWorkedExamplesIncludingHiebel) {
  ReturnLossBounds a = return_loss_bounds(20, 30, kInf);
  EXPECT_NEAR(a.worst_db, 17.6134, 0.0001);
  EXPECT_NEAR(a.best_db, 23.3018, 0.0001);
  ReturnLossBounds h = return_loss_bounds(30, 40, kInf);   // Hiebel, Fundamentals of VNA
  EXPECT_NEAR(h.worst_db, 27.6134, 0.0001);
  EXPECT_NEAR(h.best_db, 33.3018, 0.0001);
  // The error depends only on the margin D - RL: 20·log10(1 ± 10^(-(D-RL)/20)).
  EXPECT_NEAR(20 - a.worst_db, 20 * std::log10(1 + std::pow(10, -0.5)), 1e-9);
  EXPECT_NEAR(h.worst_db - 30, a.worst_db - 20, 1e-9);
}

// With source match (computed): D 35, M_S 30, RL 20 -> 18.555 / 21.734 dB;
// D 30, M_S 20, RL 20 -> 17.548 / 23.430 dB.
TEST(RfMath, SourceMatchWidensTheBounds) {
  ReturnLossBounds b = return_loss_bounds(20, 35, 30);
  EXPECT_NEAR(b.worst_db, 18.555, 0.0006);
  EXPECT_NEAR(b.best_db, 21.734, 0.0006);
  ReturnLossBounds c = return_loss_bounds(20, 30, 20);
  EXPECT_NEAR(c.worst_db, 17.548, 0.0006);
  EXPECT_NEAR(c.best_db, 23.430, 0.0006);
}

// Common practice (kTB at 290 K plus NF): -174 + 10·log10(RBW) + NF. 10 kHz, NF 24 -> -110 dBm;
// 3 MHz, NF 8 -> -101.229 dBm.
TEST(RfMath, ThermalNoiseFloor) {
  EXPECT_NEAR(thermal_noise_floor_dbm(10e3, 24), -110.0, 1e-9);
  EXPECT_NEAR(thermal_noise_floor_dbm(3e6, 8), -101.229, 0.0005);
  EXPECT_NEAR(thermal_noise_floor_dbm(1, 0), -174.0, 1e-12);
}

}  // namespace
}  // namespace echoline::core
