// The offset pair against ground truth. Each bench is built in complex arithmetic from the
// one-port error model (MEASUREMENT.md (1)) and the terminated two-port formula
// Γ_in = S11 + S21·S12·Γ_L/(1 − S22·Γ_L) (Pozar, Microwave Engineering, from memory): leakage and
// source match of any phase, an offset line anywhere inside its delay, loss and match tolerances,
// a reference error anywhere inside its bound and reading noise. The unit's true |Γ| must lie
// inside the pair's interval at every point of every bench.
#include <algorithm>
#include <cmath>
#include <complex>
#include <cstdio>
#include <numbers>
#include <random>
#include <vector>

#include <gtest/gtest.h>

#include "daemon/core/offset_pair.hpp"

namespace echoline::core {
namespace {

using cd = std::complex<double>;
constexpr double kPi = std::numbers::pi;

double db_to_gamma(double rl_db) { return std::pow(10.0, -rl_db / 20.0); }
double rl_db(double g) { return -20.0 * std::log10(std::max(g, 1e-12)); }

// A line a quarter wave long at 915 MHz (the middle of 902–928 MHz): its round trip turns Γ by π.
OffsetLine quarter_wave_915(double match_rl_db) {
  OffsetLine l;
  l.delay_s = 1.0 / (4.0 * 915e6);   // 273.2 ps
  l.delay_tolerance_s = 5e-12;       // about ±1 mm of PTFE line
  l.loss_db = 0.1;
  l.loss_tolerance_db = 0.05;
  l.match = db_to_gamma(match_rl_db);
  return l;
}

// The parallelogram law, |u + v|² + |u − v|² = 2|u|² + 2|v|² (any linear algebra text): with no
// source match, a lossless mismatch-free line exactly a half turn and |d| known, the pair gives
// |Γ| exactly whatever the leakage's phase, while one reading alone is only known to ±|d|.
TEST(OffsetPair, AnIdealHalfTurnCancelsTheLeakageExactly) {
  OffsetLine line;
  line.delay_s = 1.0 / (4.0 * 915e6);
  for (double phase_deg : {0.0, 50.0, 135.0, 270.0}) {
    const cd d = std::polar(0.056, phase_deg * kPi / 180.0);   // a 25 dB coupler
    const cd gamma = std::polar(0.3162, 0.7);                  // a 10 dB unit
    OffsetPairPoint p;
    p.frequency_hz = 915e6;
    p.p_direct = std::norm(d + gamma);
    p.p_offset = std::norm(d - gamma);
    p.directivity_low = p.directivity_high = std::abs(d);
    p.coverage_factor = 3;
    const OffsetPairInterval r = combine_offset_pair(p, line);
    ASSERT_TRUE(r.usable);
    EXPECT_NEAR(r.gamma_low, std::abs(gamma), 1e-9) << phase_deg;
    EXPECT_NEAR(r.gamma_high, std::abs(gamma), 1e-9) << phase_deg;
  }
}

// A lossy line: 0.5 dB one way is |t|² = 10^(−0.05) = 0.891 on the round trip (a power ratio of
// 10^(−L/10) per pass, common practice). With that the pair is exact again; a conversion that
// took the loss twice over would put the unit at 0.334 instead of 0.316.
TEST(OffsetPair, ALossyLineIsScaledByItsRoundTrip) {
  OffsetLine line;
  line.delay_s = 1.0 / (4.0 * 915e6);
  line.loss_db = 0.5;
  const double a = std::pow(10.0, -0.05);
  for (double phase_deg : {0.0, 90.0, 200.0}) {
    const cd d = std::polar(0.056, phase_deg * kPi / 180.0);
    const cd gamma = std::polar(0.3162, 1.1);
    OffsetPairPoint p;
    p.frequency_hz = 915e6;
    p.p_direct = std::norm(d + gamma);
    p.p_offset = std::norm(d - a * gamma);
    p.directivity_low = p.directivity_high = std::abs(d);
    const OffsetPairInterval r = combine_offset_pair(p, line);
    EXPECT_NEAR(r.gamma_low, std::abs(gamma), 1e-9) << phase_deg;
    EXPECT_NEAR(r.gamma_high, std::abs(gamma), 1e-9) << phase_deg;
  }
}

// A quarter-wave line turns the reflection by 2·2π·f·τ = π·f/915 MHz: off by π·(1 − f/915 MHz)
// at another frequency (arithmetic from the definition of electrical delay; common practice).
TEST(OffsetPair, TheTurnErrorFollowsTheLinesDelay) {
  OffsetLine line;
  line.delay_s = 1.0 / (4.0 * 915e6);
  EXPECT_NEAR(offset_turn_error(915e6, line), 0.0, 1e-12);
  EXPECT_NEAR(offset_turn_error(860e6, line), kPi * (1.0 - 860.0 / 915.0), 1e-12);   // 10.8°
  EXPECT_NEAR(offset_turn_error(970e6, line), kPi * (970.0 / 915.0 - 1.0), 1e-12);
  line.delay_tolerance_s = 5e-12;   // 2·2π·915 MHz·5 ps = 3.3° more at most
  EXPECT_NEAR(offset_turn_error(915e6, line), 4.0 * kPi * 915e6 * 5e-12, 1e-12);
  // A line twice as long turns by a whole turn: nothing cancels, the pair is not used.
  line.delay_s *= 2.0;
  line.delay_tolerance_s = 0;
  OffsetPairPoint p;
  p.frequency_hz = 915e6;
  p.p_direct = p.p_offset = 0.1;
  EXPECT_FALSE(combine_offset_pair(p, line).usable);
  EXPECT_NEAR(offset_turn_error(915e6, line), kPi, 1e-9);
}

struct BenchFigures {
  long points = 0, outside = 0;
  std::vector<double> pair_width_db, single_width_db;   // at units reading 9–11 dB
};

// Random benches behind a coupler of `directivity_db`, a 25 dB source match, a LOAD that leaves
// |d| known to ±0.01 (40 dB), ±0.05 dB reference error, 0.03 dB reading noise (clipped at 2σ,
// so the k = 3 widening covers both readings' noise) and the unit's connection made anew for
// each reading (a 60 dB repeatability: k·u_conn = 0.003, drawn within it).
BenchFigures run_benches(double directivity_db, double line_match_db, int benches, unsigned seed) {
  std::mt19937 rng(seed);
  std::uniform_real_distribution<double> u01(0.0, 1.0);
  std::normal_distribution<double> n01(0.0, 1.0);
  const OffsetLine line = quarter_wave_915(line_match_db);
  const double sigma_db = 0.03, load_residual = db_to_gamma(40), ref_bound_db = 0.05;
  const double s_bound = db_to_gamma(25), connection = 3 * db_to_gamma(60);
  BenchFigures fig;
  for (int b = 0; b < benches; ++b) {
    const double d_mag = db_to_gamma(directivity_db) * (0.7 + 0.3 * u01(rng));
    const double d_phase = 2 * kPi * u01(rng), d_delay = 5e-9 * u01(rng);   // leakage turning with frequency
    const double s_mag = s_bound * u01(rng), s_phase = 2 * kPi * u01(rng);
    const double tau = line.delay_s + line.delay_tolerance_s * (2 * u01(rng) - 1);
    const double loss = line.loss_db + line.loss_tolerance_db * (2 * u01(rng) - 1);
    const double a = std::pow(10.0, -loss / 10.0);   // |t|², t the one-way transmission (loss dB one way)
    const cd m1 = std::polar(line.match * u01(rng), 2 * kPi * u01(rng));
    const cd m2 = std::polar(line.match * u01(rng), 2 * kPi * u01(rng));
    const double ref_err_db = ref_bound_db * (2 * u01(rng) - 1);
    // The unit: a series RLC (its impedance circle) behind a feed of unknown length.
    const double f0 = 880e6 + 70e6 * u01(rng), q = 4 + 8 * u01(rng), r = 20 + 60 * u01(rng);
    const double feed = 1e-9 * u01(rng);
    const double load_seen = d_mag + load_residual * (2 * u01(rng) - 1);   // what the LOAD said of |d|
    for (int i = 0; i < 111; ++i) {
      const double f = 860e6 + 1e6 * i;
      const double w = 2 * kPi * f;
      const cd z(r, q * 50.0 * (f / f0 - f0 / f));
      const cd gamma = (z - 50.0) / (z + 50.0) * std::polar(1.0, -2 * w * feed);
      const cd d = std::polar(d_mag, d_phase - 2 * w * d_delay);
      const cd s = std::polar(s_mag, s_phase - 2 * w * 2e-9);
      const cd t2 = std::polar(a, -2 * w * tau);
      const cd c_a = std::polar(connection * u01(rng), 2 * kPi * u01(rng));   // each connection's own error
      const cd c_b = std::polar(connection * u01(rng), 2 * kPi * u01(rng));
      const cd g_a = gamma + c_a;
      const cd g_b = m1 + t2 * (gamma + c_b) / (1.0 - m2 * (gamma + c_b));
      auto reading = [&](cd g) {
        const double noise = std::clamp(n01(rng), -2.0, 2.0) * sigma_db;
        const double p_true = std::norm(d + g / (1.0 - s * g));
        return p_true * std::pow(10.0, (noise - ref_err_db) / 10.0);   // relative to R, not T
      };
      OffsetPairPoint p;
      p.frequency_hz = f;
      p.p_direct = reading(g_a);
      p.p_offset = reading(g_b);
      p.reference_low_db = -ref_bound_db;
      p.reference_high_db = ref_bound_db;
      p.sigma_direct_db = p.sigma_offset_db = sigma_db;
      p.coverage_factor = 3;
      p.directivity_low = std::max(0.0, load_seen - load_residual);
      p.directivity_high = load_seen + load_residual;
      p.source_match = s_bound;
      p.connection = connection;
      const OffsetPairInterval iv = combine_offset_pair(p, line);
      EXPECT_TRUE(iv.usable) << f;
      const double g_true = std::abs(gamma);
      ++fig.points;
      if (g_true < iv.gamma_low - 1e-12 || g_true > iv.gamma_high + 1e-12) {
        ++fig.outside;
        if (fig.outside <= 5) {
          ADD_FAILURE() << "bench " << b << " at " << f / 1e6 << " MHz: |Γ| " << g_true << " outside ["
                        << iv.gamma_low << ", " << iv.gamma_high << "]";
        }
      }
      // The single reading's interval (§3.6) at the same point, for comparison.
      const double k = 3, c_lo = std::pow(10.0, (-ref_bound_db - k * sigma_db) / 10.0);
      const double c_hi = std::pow(10.0, (ref_bound_db + k * sigma_db) / 10.0);
      const double e = p.directivity_high + connection;   // §3.6: |E_D| bound + k·u_conn
      const double g1_lo = std::max(0.0, std::sqrt(c_lo * p.p_direct) - e);
      const double g1_hi = std::sqrt(c_hi * p.p_direct) + e;
      const double single_lo = g1_lo / (1 + s_bound * g1_lo), single_hi = std::min(1.0, g1_hi / (1 - s_bound * g1_hi));
      const double rl = rl_db(g_true);
      if (rl > 9 && rl < 11) {
        fig.pair_width_db.push_back(rl_db(iv.gamma_low) - rl_db(iv.gamma_high));
        fig.single_width_db.push_back(rl_db(single_lo) - rl_db(single_hi));
      }
    }
  }
  return fig;
}

double median(std::vector<double> v) {
  std::nth_element(v.begin(), v.begin() + static_cast<long>(v.size() / 2), v.end());
  return v[v.size() / 2];
}

void report(const char* what, const BenchFigures& f) {
  std::printf("%s: %ld points, %ld outside; at 9-11 dB RL (%zu points) median interval width %.2f dB "
              "(pair) against %.2f dB (one reading)\n",
              what, f.points, f.outside, f.pair_width_db.size(), median(f.pair_width_db), median(f.single_width_db));
}

// The line's own mismatch does not turn with the unit and is not cancelled: it enters at first
// order (2·|Γ|·|S11|), so the pair pays only with a well-matched line. Figures in §12.
TEST(OffsetPair, TheTrueReflectionStaysInsideBehindA25dBCoupler) {
  const BenchFigures f40 = run_benches(25, 40, 400, 11);
  report("25 dB coupler, 40 dB line match", f40);
  EXPECT_EQ(f40.outside, 0);
  ASSERT_GT(f40.pair_width_db.size(), 100u);
  // One reading leaves a 10 dB unit within about 3.7 dB (|d| 0.056 ± 0.01): the pair within
  // well under half of that.
  EXPECT_LT(median(f40.pair_width_db), 0.45 * median(f40.single_width_db));
  const BenchFigures f30 = run_benches(25, 30, 400, 11);
  report("25 dB coupler, 30 dB line match", f30);
  EXPECT_EQ(f30.outside, 0);
  EXPECT_GT(median(f30.pair_width_db), median(f40.pair_width_db));
}

TEST(OffsetPair, TheTrueReflectionStaysInsideBehindA35dBCoupler) {
  const BenchFigures f40 = run_benches(35, 40, 400, 12);
  report("35 dB coupler, 40 dB line match", f40);
  EXPECT_EQ(f40.outside, 0);
  ASSERT_GT(f40.pair_width_db.size(), 100u);
  EXPECT_LT(median(f40.pair_width_db), 0.8 * median(f40.single_width_db));
  const BenchFigures f50 = run_benches(35, 50, 400, 12);
  report("35 dB coupler, 50 dB line match", f50);
  EXPECT_EQ(f50.outside, 0);
}

// The bound against the worst the terms can do: every phase (leakage, source match, both ends of
// the line, the unit) searched on a grid at the sweep's edge, where the line is furthest from a
// half turn. Nothing else is uncertain, so the interval is the residual alone. The worst
// case found must lie inside it and use most of it (a bound several times too wide would
// leave units undecided for nothing).
TEST(OffsetPair, TheResidualBoundIsReachedByTheWorstPhases) {
  OffsetLine line = quarter_wave_915(40);
  line.delay_tolerance_s = 0;
  line.loss_tolerance_db = 0;
  const double f = 860e6, w = 2 * kPi * f;
  const double a = std::pow(10.0, -line.loss_db / 10.0);
  const cd t2 = std::polar(a, -2 * w * line.delay_s);
  const double d_mag = db_to_gamma(25), s_mag = db_to_gamma(25), g_mag = db_to_gamma(10);
  double reach = 0;
  long outside = 0;
  const int n = 16;
  for (int i = 0; i < n; ++i)
    for (int j = 0; j < n; ++j)
      for (int k = 0; k < n; ++k)
        for (int l = 0; l < n; ++l) {
          const cd gamma = std::polar(g_mag, 2 * kPi * i / n);
          const cd d = std::polar(d_mag, 2 * kPi * j / n);
          const cd m1 = std::polar(line.match, 2 * kPi * k / n);
          const cd s = std::polar(s_mag, 2 * kPi * l / n);
          const cd m2 = std::polar(line.match, 2 * kPi * (k + l) / n);
          const cd g_b = m1 + t2 * gamma / (1.0 - m2 * gamma);
          OffsetPairPoint p;
          p.frequency_hz = f;
          p.p_direct = std::norm(d + gamma / (1.0 - s * gamma));
          p.p_offset = std::norm(d + g_b / (1.0 - s * g_b));
          p.directivity_low = p.directivity_high = d_mag;
          p.source_match = s_mag;
          const OffsetPairInterval iv = combine_offset_pair(p, line);
          // 1e-12: at some phases the direct reading's own bound (§3.6) is reached exactly.
          if (g_mag < iv.gamma_low - 1e-12 || g_mag > iv.gamma_high + 1e-12) ++outside;
          // How much of the residual bound this phase uses: the sum's error in |Γ|² against it.
          const double x = 1 / a, d2 = d_mag * d_mag;
          const double estimate = x * (p.p_direct - d2 + x * (p.p_offset - d2)) / (x + 1);
          reach = std::max(reach, std::abs(estimate - g_mag * g_mag) / (x / (x + 1) * iv.residual));
        }
  std::printf("worst phases at 860 MHz (25 dB coupler and source match, 40 dB line): %ld outside; the worst "
              "phases used %.0f %% of the residual bound\n",
              outside, 100 * reach);
  EXPECT_EQ(outside, 0);
  EXPECT_LE(reach, 1.0);
  EXPECT_GT(reach, 0.7);
}

}  // namespace
}  // namespace echoline::core
