// The directivity phase from an OPEN/SHORT/LOAD calibration, against a bench whose leakage d and
// source match E_S are known (the one-port model b = E_D + Γ/(1 − E_S·Γ), common practice): the
// real part recovered holds the true one, and the phase is recoverable only when the test-port
// match is well below the leakage (MEASUREMENT.md, "The directivity phase").
#include <cmath>
#include <complex>
#include <numbers>

#include <gtest/gtest.h>

#include "daemon/core/directivity_phase.hpp"
#include "tests/core/synthetic_bench.hpp"

namespace echoline::core {
namespace {

using testing_bench::Bench;

DirectivityPhase recover(double source_match_db, Bench& bench) {
  Recipe r = testing_bench::whip_recipe();
  r.source_match_db = source_match_db;
  bench.source_match_db = source_match_db;
  StationCapability st = testing_bench::station();
  st.source_match_db = source_match_db;
  const CalibrationRecord cal = build_calibration(r, testing_bench::standards(r, bench), st, "cal-1", "2026-12-01T08:00:00Z");
  EXPECT_TRUE(cal.valid);
  return recover_directivity_phase(cal, st.kit);
}

TEST(DirectivityPhase, TheRecoveredRealPartHoldsTheTrueOne) {
  for (double match : {25.0, 35.0, 45.0}) {
    Bench bench;
    const DirectivityPhase p = recover(match, bench);
    ASSERT_EQ(p.frequency_hz.size(), 201u);
    for (std::size_t i = 0; i < p.frequency_hz.size(); i += 10) {
      // The synthetic bench's leakage (synthetic_bench.hpp): |d| = 10^(−35/20), phase 2π·f·5 ns.
      const double f = p.frequency_hz[i];
      const std::complex<double> d = std::polar(std::pow(10.0, -bench.directivity_db / 20), 2 * std::numbers::pi * f * bench.delay_s);
      EXPECT_LE(std::fabs(p.real_part[i] - d.real()), p.real_part_bound[i] * 1.02) << match << " dB at " << f;
      EXPECT_GE(std::abs(d), p.magnitude_low[i] - 1e-12);
      EXPECT_LE(std::abs(d), p.magnitude_high[i] + 1e-12);
    }
  }
}

TEST(DirectivityPhase, ASourceMatchAsLargeAsTheLeakageLeavesThePhaseUnknown) {
  // 25 and 35 dB test-port match behind a 35 dB coupler: |E_S| >= |d|, so the OPEN−SHORT
  // difference cannot tell their real parts apart.
  Bench b25, b35;
  EXPECT_FALSE(recover(25, b25).supported);
  EXPECT_GT(recover(25, b25).median_phase_half_width_deg, 80);
  EXPECT_FALSE(recover(35, b35).supported);
}

TEST(DirectivityPhase, AWellMatchedTestPortRevealsIt) {
  // 50 dB test-port match (10^(−50/20) = 0.0032 against |d| = 0.0178): cos(arg d) to about ±0.2.
  Bench b;
  const DirectivityPhase p = recover(50, b);
  EXPECT_TRUE(p.supported) << p.median_phase_half_width_deg;
}

}  // namespace
}  // namespace echoline::core
