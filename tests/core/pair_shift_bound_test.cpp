// The offset pair's resonance bound against ground truth. Each bench is built in complex
// arithmetic from the one-port error model b = E_D + Γ/(1 − E_S·Γ) (common practice, no source)
// and the terminated two-port Γ_in = S11 + S21·S12·Γ_L/(1 − S22·Γ_L) (Pozar, Microwave
// Engineering, from memory): a leakage of any phase turning over up to 5 ns, a source match of
// any phase, an offset line anywhere inside its delay, loss and match tolerances, a LOAD whose
// own reflection has any phase, a reference error rippling inside its bound (its second order at
// twice the rate), the unit's connection made anew for each reading, and reading noise. The
// unit is a series RLC or a
// transmission-line monopole (Z = R/sin²(kh) − j·Z_a·cot(kh), the thin-antenna line model,
// Balanis, Antenna Theory, from memory) behind a feed of unknown length; its true resonance is
// the minimum of its own |Γ|, found here on a 5 kHz grid.
#include <algorithm>
#include <cmath>
#include <complex>
#include <cstdio>
#include <numbers>
#include <random>
#include <string>
#include <vector>

#include <gtest/gtest.h>

#include "daemon/core/analysis.hpp"
#include "daemon/core/offset_pair.hpp"
#include "daemon/core/pair_shift_bound.hpp"

namespace echoline::core {
namespace {

using cd = std::complex<double>;
constexpr double kPi = std::numbers::pi;

double db_to_gamma(double rl_db) { return std::pow(10.0, -rl_db / 20.0); }

OffsetLine kit_line() {
  OffsetLine l;
  l.delay_s = 273.2e-12;   // a quarter wave at 915 MHz
  l.delay_tolerance_s = 2e-12;
  l.loss_db = 0.08;
  l.loss_tolerance_db = 0.04;
  l.match = db_to_gamma(39);
  return l;
}

enum class Model { rlc, monopole };

struct Figures {
  int benches = 0, bounded = 0, outside = 0;
  std::vector<double> half_width_hz, rigorous_half_width_hz;
  double most_used = 0;   // the largest |truth − centre| / half-width: how much of the bound a bench used
};

double median(std::vector<double> v) {
  if (v.empty()) return 0;
  std::nth_element(v.begin(), v.begin() + static_cast<long>(v.size() / 2), v.end());
  return v[v.size() / 2];
}

Figures run(Model model, double directivity_db, int benches, unsigned seed) {
  std::mt19937 rng(seed);
  std::uniform_real_distribution<double> u01(0.0, 1.0);
  std::normal_distribution<double> n01(0.0, 1.0);
  const OffsetLine line = kit_line();
  const double sigma_db = 0.03, ref_bound_db = 0.05, error_delay = 5e-9;
  const double load_residual = db_to_gamma(40), s_bound = db_to_gamma(25), connection = 3 * db_to_gamma(60);
  Figures fig;
  for (int b = 0; b < benches; ++b) {
    const double e_bound = db_to_gamma(directivity_db) + load_residual;   // what the LOAD allows of |d|
    const double d_mag = db_to_gamma(directivity_db) * (0.7 + 0.3 * u01(rng));
    const double d_phase = 2 * kPi * u01(rng), d_delay = error_delay * u01(rng);
    const double s_mag = s_bound * u01(rng), s_phase = 2 * kPi * u01(rng);
    const double tau = line.delay_s + line.delay_tolerance_s * (2 * u01(rng) - 1);
    const double a = std::pow(10.0, -(line.loss_db + line.loss_tolerance_db * (2 * u01(rng) - 1)) / 10);
    const cd m_near = std::polar(0.5 * line.match * u01(rng), 2 * kPi * u01(rng));
    const cd m_far = std::polar(0.5 * line.match * u01(rng), 2 * kPi * u01(rng));
    const cd s22 = std::polar(line.match * u01(rng), 2 * kPi * u01(rng));
    const double l_mag = load_residual * u01(rng), l_phase = 2 * kPi * u01(rng);
    const double ref_a = ref_bound_db * u01(rng), ref_phase = 2 * kPi * u01(rng);
    const double ref_b = (ref_bound_db - ref_a) * (2 * u01(rng) - 1);
    // Of the ripple, the second order in the leakage and source match (w²/(2(1 − w)) at most,
    // uncertainty.cpp) turns twice as fast; up to that much of it here.
    const double w_ref = e_bound + s_bound / (1 - s_bound);
    const double ref2 = std::min(ref_a, 20 / std::log(10.0) * w_ref * w_ref / (2 * (1 - w_ref))) * u01(rng);
    const double ref1 = ref_a - ref2, ref2_phase = 2 * kPi * u01(rng);
    const cd c_a = std::polar(connection * u01(rng), 2 * kPi * u01(rng));
    const cd c_b = std::polar(connection * u01(rng), 2 * kPi * u01(rng));
    const double feed = 0.5e-9 * u01(rng);
    // The unit.
    const double f_c = 885e6 + 60e6 * u01(rng);
    const double q = 4 + 8 * u01(rng), r_rlc = 30 + 40 * u01(rng);
    const double z_a = 150 + 300 * u01(rng), r_mono = 28 + 40 * u01(rng);
    auto unit = [&](double f) {
      cd z;
      if (model == Model::rlc) {
        z = cd(r_rlc, q * 50.0 * (f / f_c - f_c / f));
      } else {
        const double kh = 0.5 * kPi * f / f_c;
        z = cd(r_mono / std::pow(std::sin(kh), 2), -z_a / std::tan(kh));
      }
      return (z - 50.0) / (z + 50.0) * std::polar(1.0, -4 * kPi * f * feed);
    };
    PairSumTrace t;
    t.nuisance.line = line;
    t.nuisance.source_match = s_bound;
    t.nuisance.connection = connection;
    t.nuisance.error_delay_s = error_delay;
    t.nuisance.reference_ratio = std::pow(10.0, ref_bound_db / 10) - 1;
    cover_reference_turning(t.nuisance, -ref_bound_db, ref_bound_db, e_bound, s_bound);
    t.coverage_factor = 3;
    const double x_hat = 1 / std::pow(10.0, -line.loss_db / 10), w = x_hat / (1 + x_hat);
    std::vector<PointResult> points;
    for (int i = 0; i < 221; ++i) {
      const double f = 860e6 + 0.5e6 * i, om = 2 * kPi * f;
      const cd d = std::polar(d_mag, d_phase - om * d_delay);
      const cd s = std::polar(s_mag, s_phase - om * 4e-9);
      const cd t2 = std::polar(a, -2 * om * tau);
      const cd s11 = m_near + t2 * m_far;
      const double ref_db =
          ref1 * std::cos(om * error_delay + ref_phase) + ref2 * std::cos(2 * om * error_delay + ref2_phase) + ref_b;
      auto reading = [&](cd g) {
        const double noise = std::clamp(n01(rng), -2.0, 2.0) * sigma_db;
        return std::norm(d + g / (1.0 - s * g)) * std::pow(10.0, (noise - ref_db) / 10);
      };
      const cd gu = unit(f);
      const cd ga = gu + c_a * std::polar(1.0, -om * 1e-9);
      const cd gb_end = gu + c_b * std::polar(1.0, -om * 1e-9);
      const cd gb = s11 + t2 * gb_end / (1.0 - s22 * gb_end);
      const cd gl = std::polar(l_mag, l_phase - om * 0.4e-9);
      const double p_a = reading(ga), p_b = reading(gb), load = reading(gl);
      OffsetPairPoint p;
      p.frequency_hz = f;
      p.p_direct = p_a;
      p.p_offset = p_b;
      p.reference_low_db = -ref_bound_db;
      p.reference_high_db = ref_bound_db;
      p.sigma_direct_db = p.sigma_offset_db = sigma_db;
      p.directivity_low = std::max(0.0, std::sqrt(load) * std::pow(10.0, (-ref_bound_db - 3 * sigma_db) / 20) - load_residual);
      p.directivity_high = e_bound;
      p.source_match = s_bound;
      p.connection = connection;
      const OffsetPairInterval iv = combine_offset_pair(p, line);
      PointResult pr;
      pr.frequency_hz = f;
      pr.return_loss_worst_db = -20 * std::log10(std::max(iv.gamma_high, 1e-9));
      pr.return_loss_best_db = iv.gamma_low > 0 ? -20 * std::log10(iv.gamma_low) : 300;
      pr.return_loss_db = -20 * std::log10(std::clamp(iv.gamma_estimate, std::max(iv.gamma_low, 1e-9), iv.gamma_high));
      points.push_back(pr);
      t.frequency_hz.push_back(f);
      const double e_rel = sigma_db * std::log(10.0) / 10;
      t.y.push_back(w * ((p_a - load) + x_hat * (p_b - load)));
      t.sigma_y.push_back(w * e_rel * std::sqrt(p_a * p_a + x_hat * x_hat * p_b * p_b + std::pow((1 + x_hat) * load, 2)));
      t.gamma_high.push_back(iv.gamma_high);
      t.return_loss_db.push_back(pr.return_loss_db);
      t.leakage.push_back(e_bound);
      t.load_residual.push_back(load_residual);
      t.turn_error_rad.push_back(iv.turn_error_rad);
      t.usable.push_back(iv.usable);
    }
    std::size_t peak = 0;
    for (std::size_t i = 1; i < points.size(); ++i) {
      if (points[i].return_loss_db > points[peak].return_loss_db) peak = i;
    }
    ++fig.benches;
    const auto pb = pair_shift_bound(t, peak);
    if (!pb) continue;
    // The truth: the unit's own |Γ| minimum near the peak.
    double f_true = 0, g_min = 2;
    for (double f = t.frequency_hz[peak] - 40e6; f <= t.frequency_hz[peak] + 40e6; f += 5e3) {
      const double g = std::abs(unit(f));
      if (g < g_min) {
        g_min = g;
        f_true = f;
      }
    }
    ++fig.bounded;
    const Band rig = resonance_interval(points, peak);
    fig.half_width_hz.push_back(pb->half_width_hz);
    if (!rig.low_open && !rig.high_open) fig.rigorous_half_width_hz.push_back(0.5 * (rig.high_hz - rig.low_hz));
    fig.most_used = std::max(fig.most_used, std::fabs(f_true - pb->center_hz) / pb->half_width_hz);
    if (std::fabs(f_true - pb->center_hz) > pb->half_width_hz) {
      ++fig.outside;
      if (fig.outside <= 5) {
        ADD_FAILURE() << "bench " << b << ": true resonance " << f_true / 1e6 << " MHz outside " << pb->center_hz / 1e6
                      << " ± " << pb->half_width_hz / 1e6 << " MHz (nuisance " << pb->nuisance_hz / 1e6 << ", k·σ "
                      << pb->statistical_hz / 1e6 << ", gap " << pb->gap_hz / 1e6 << ")";
      }
    }
  }
  return fig;
}

// One sample of a sum trace: the sum y, the unit's |Γ|² (its upper bound |Γ| + margin), the
// reading's noise and the bench's bounds there.
void add_sample(PairSumTrace& t, double f, double y, double g2, double margin, double leakage, double load_residual,
                double turn_rad) {
  t.frequency_hz.push_back(f);
  t.y.push_back(y);
  t.sigma_y.push_back(1e-5);
  t.gamma_high.push_back(std::sqrt(g2) + margin);
  t.return_loss_db.push_back(-10 * std::log10(y));
  t.leakage.push_back(leakage);
  t.load_residual.push_back(load_residual);
  t.turn_error_rad.push_back(turn_rad);
  t.usable.push_back(true);
}

void report(const char* what, const Figures& f) {
  std::printf("%s: %d benches, bound given for %d, true resonance outside %d (at most %.2f of the half-width "
              "from the centre); median half-width %.3f MHz against %.3f MHz for the rigorous interval of the "
              "pair's points\n",
              what, f.benches, f.bounded, f.outside, f.most_used, median(f.half_width_hz) / 1e6,
              median(f.rigorous_half_width_hz) / 1e6);
}

// One model behind both couplers: every truth inside, the bound given for at least
// `min_bounded` of 300 benches, and its median half-width under `ratio_35` / `ratio_25` of the
// points' rigorous interval's.
void check_model(Model model, const char* name, unsigned seed, int min_bounded, double ratio_35, double ratio_25) {
  for (double dir : {35.0, 25.0}) {
    const Figures f = run(model, dir, 300, seed + (dir == 35 ? 0 : 1));
    report((std::string(name) + (dir == 35 ? ", 35 dB coupler" : ", 25 dB coupler")).c_str(), f);
    EXPECT_EQ(f.outside, 0) << name << " " << dir;
    EXPECT_GT(f.bounded, min_bounded) << name << " " << dir;
    EXPECT_LT(median(f.half_width_hz), (dir == 35 ? ratio_35 : ratio_25) * median(f.rigorous_half_width_hz))
        << name << " " << dir;
  }
}

// The bound holds the true resonance on every bench and is a part of the points' rigorous
// interval: the half turn cancels the leakage's cross term, so what is left is the line's own
// mismatch, the connection and second-order terms, over a curvature the terms may bend by B₂
// (MEASUREMENT.md §12.1; measured 2026-12-05 with the fit's kernels, the scale bounded on the
// samples to the second order and three windows: median 2.59 / 10.94 MHz behind 35 dB and
// 4.11 / 14.41 MHz behind 25 dB).
TEST(PairShiftBound, TheSumHoldsTheTrueResonanceOfASeriesRlc) {
  check_model(Model::rlc, "series RLC", 21, 240, 0.3, 0.4);
}

// Broad monopole dips (Q down to 2.5) have a small slope, and every term divides by it; behind
// 25 dB the sum is about half the points' rigorous interval (measured 2026-12-05 as above:
// median 5.67 / 18.30 MHz behind 35 dB, 9.82 / 21.68 MHz behind 25 dB).
TEST(PairShiftBound, TheSumHoldsTheTrueResonanceOfALineMonopole) {
  check_model(Model::monopole, "line monopole", 31, 140, 0.4, 0.6);
}

// Where its assumptions fail the bound is not given, and the rigorous interval decides: a dip
// under 12 dB (a curved trajectory), a dip running off the sweep, a point where the pair was not
// usable, a second dip (checked by find_resonance before the bound is asked for).
TEST(PairShiftBound, IsRefusedWhereItsAssumptionsFail) {
  PairSumTrace t;
  t.nuisance.line = kit_line();
  for (int i = 0; i < 101; ++i) {
    const double f = 880e6 + 0.5e6 * i, x = (f - 905e6) / 1e6;
    const double g2 = 0.01 + 0.0004 * x * x;   // a 20 dB dip at 905 MHz
    add_sample(t, f, g2, g2, 0.01, 0.03, 0.01, 0.05);
  }
  const std::size_t peak = 50;
  const auto ok = pair_shift_bound(t, peak);
  ASSERT_TRUE(ok.has_value());
  EXPECT_NEAR(ok->center_hz, 905e6, 0.05e6);   // the vertex of an exact parabola
  PairSumTrace shallow = t;
  for (double& rl : shallow.return_loss_db) rl -= 9;   // peak 11 dB
  EXPECT_FALSE(pair_shift_bound(shallow, peak).has_value());
  PairSumTrace unusable = t;
  unusable.usable[peak + 1] = false;
  EXPECT_FALSE(pair_shift_bound(unusable, peak).has_value());
  PairSumTrace off_sweep = t;
  for (std::size_t i = 0; i < off_sweep.return_loss_db.size(); ++i) off_sweep.return_loss_db[i] = 20 - 0.001 * std::fabs(50.0 - i);
  EXPECT_FALSE(pair_shift_bound(off_sweep, peak).has_value());
}

// Where what the sum leaves is as large as the unit's bottom, the bottom's estimate can read far
// deeper than the unit (here 40 dB on a 20 dB dip: N = −0.0099 there, a constant that moves no
// vertex). The windows are set under what N and the noise could make of the bottom, so they span
// the unit's dip and the bound is given (a window 6 dB under 40 dB would hold one point a side).
TEST(PairShiftBound, AWindowSpansTheUnitsDipWhenItsBottomReadsDeep) {
  PairSumTrace t;
  t.nuisance.line = kit_line();
  for (int i = 0; i < 101; ++i) {
    const double f = 880e6 + 0.5e6 * i, x = (f - 905e6) / 1e6;
    const double y = 0.01 + 0.0004 * x * x - 0.0099;
    add_sample(t, f, y, y + 0.0099, 0.01, 0.03, 0.01, 0.05);
  }
  const auto b = pair_shift_bound(t, 50);
  ASSERT_TRUE(b.has_value());
  EXPECT_LE(std::fabs(b->center_hz - 905e6), b->half_width_hz);
  EXPECT_NEAR(b->center_hz, 905e6, 0.05e6);
}

// A broad, shallow dip (13 dB, Q about 4, like the wire whips) read through a reference error
// that ripples at the error delay's rate with the largest size its bound allows, at twelve
// phases: the whole sum is scaled by 1/(1 + ρ·cos(ωf + φ)) and nothing else disturbs it. The
// scale's share is bounded on the window's own samples (MEASUREMENT.md §12.1, T9): the truth
// must lie inside at every phase. Bounding the scale interval by interval (|ε′|·|y′|, no use of
// the window's symmetry, the 6 dB and 3 dB windows only) left this dip 53 MHz wide at the worst
// phase; on the samples, with the 1.5 dB window too, 20.9 MHz, and 19.95 MHz with the scale to
// the second order (measured 2026-12-05). Asked:
// under 30 MHz.
TEST(PairShiftBound, AReferenceRippleAcrossABroadDipIsBoundedOnTheSamples) {
  const double rho = 0.036, omega = 2 * kPi * 5e-9, f0 = 915.3e6;
  double widest = 0, most_used = 0;
  for (int k = 0; k < 12; ++k) {
    const double phi = 2 * kPi * k / 12;
    PairSumTrace t;
    t.nuisance.line = kit_line();
    t.nuisance.source_match = db_to_gamma(25);
    t.nuisance.connection = 0.003;
    t.nuisance.error_delay_s = 5e-9;
    t.nuisance.reference_ratio = rho;
    t.nuisance.reference_slope_ratio = rho;
    t.nuisance.reference_curvature_ratio = rho;
    for (int i = 0; i < 221; ++i) {
      const double f = 860e6 + 0.5e6 * i;
      const double g2 = 0.05 + 2.9e-17 * (f - f0) * (f - f0);   // the unit's |Γ|²
      add_sample(t, f, g2 / (1 + rho * std::cos(omega * f + phi)), g2, 0.02, 0.04, 0.013, 0.15);
    }
    const std::size_t peak = static_cast<std::size_t>(
        std::min_element(t.y.begin(), t.y.end()) - t.y.begin());
    const auto b = pair_shift_bound(t, peak);
    ASSERT_TRUE(b.has_value()) << "phase " << k;
    EXPECT_LE(std::fabs(b->center_hz - f0), b->half_width_hz) << "phase " << k;
    widest = std::max(widest, b->half_width_hz);
    most_used = std::max(most_used, std::fabs(b->center_hz - f0) / b->half_width_hz);
  }
  std::printf("a reference ripple of %.3f at 5 ns across a 13 dB, Q 4 dip: widest half-width %.2f MHz over 12 "
              "phases, at most %.2f of it used\n", rho, widest / 1e6, most_used);
  EXPECT_LT(widest, 30e6);
}

}  // namespace
}  // namespace echoline::core
