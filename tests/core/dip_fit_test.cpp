// The dip fit against ground truth: units of both physical models (series RLC, transmission-
// line monopole) behind a feed line, read through a bench whose directivity leakage and source
// match turn with frequency, with 0.05 dB of reading noise. The fitted interval must hold the
// true resonance and be much narrower than the rigorous one; units outside the models are refused.
#include <cmath>
#include <complex>
#include <random>
#include <vector>

#include <gtest/gtest.h>

#include "daemon/core/analysis.hpp"
#include "daemon/core/dip_fit.hpp"
#include "daemon/core/dip_models.hpp"

namespace echoline::core {
namespace {

using cd = std::complex<double>;
constexpr double kPi = 3.14159265358979323846;

// Series RLC on 50 ohm: Z = R + j(ωL − 1/(ωC)), L = Q·R/ω0, C = 1/(ω0·Q·R) (textbook; Balanis,
// Antenna Theory [memory]), written independently of dip_models.cpp's circle form.
cd rlc(double f, double f0, double q, double r) {
  const double w0 = 2 * kPi * f0, w = 2 * kPi * f;
  const cd z(r, w * q * r / w0 - 1.0 / (w / (w0 * q * r)));
  return (z - 50.0) / (z + 50.0);
}

struct Bench {
  double directivity_db = 35, source_match_db = 25;
  double error_delay_s = 5e-9;   // the leakage's and the source match's phase turn against the unit's
  double phase = 0;              // leakage phase at 0 Hz
  double noise_db = 0.05;
  unsigned seed = 1;
};

struct Trace {
  std::vector<PointResult> points;
  DipFitContext ctx;
};

// The one-port model b = E_D + Γ/(1 − E_S·Γ) (common practice), bounds as the budget makes them
// without reference error: |Γ| within |Γ_m| ± (|E_D| + LOAD residual + |E_S||Γ_m|² + 3σ).
Trace measure(const Bench& b, const std::function<cd(double)>& unit) {
  Trace t;
  std::mt19937 rng(b.seed);
  std::normal_distribution<double> noise(0, b.noise_db);
  const double ed = std::pow(10.0, -b.directivity_db / 20), es = std::pow(10.0, -b.source_match_db / 20);
  for (int i = 0; i < 201; ++i) {
    const double f = 860e6 + 110e6 * i / 200.0;
    const cd e_d = std::polar(ed, b.phase + 2 * kPi * f * b.error_delay_s);
    const cd e_s = std::polar(es, 1.3 - 2 * kPi * f * b.error_delay_s);
    const cd g = unit(f);
    const double gm = std::abs(e_d + g / (1.0 - e_s * g)) * std::pow(10.0, noise(rng) / 20);
    PointResult p;
    p.frequency_hz = f;
    p.return_loss_db = -20 * std::log10(gm);
    const double e = ed + std::pow(10.0, -42.0 / 20) + es * gm * gm + gm * (std::pow(10.0, 3 * b.noise_db / 20) - 1);
    p.return_loss_worst_db = -20 * std::log10(std::min(gm + e, 1.0));
    p.return_loss_best_db = gm > e ? -20 * std::log10(gm - e) : INFINITY;
    t.points.push_back(p);
    t.ctx.sigma_db.push_back(b.noise_db);
    // The calibration's bound: the leakage plus a 42 dB LOAD's residual, as the budget adds it.
    t.ctx.error_vector.push_back(ed + std::pow(10.0, -42.0 / 20));
  }
  t.ctx.source_match = es;
  t.ctx.error_delay_s = b.error_delay_s;
  t.ctx.coverage_factor = 3;
  return t;
}

std::size_t peak_of(const std::vector<PointResult>& p) {
  std::size_t k = 0;
  for (std::size_t i = 1; i < p.size(); ++i) {
    if (p[i].return_loss_db > p[k].return_loss_db) k = i;
  }
  return k;
}

TEST(DipModels, SeriesRlcCircleEqualsTheImpedanceFormula) {
  // Q·Z0/(R+Z0) and Z0/(R+Z0) from Q = 12, R = 40 ohm.
  const DipShape s{DipModel::series_rlc, 915e6, 12 * 40.0 / 90.0, 50.0 / 90.0};
  for (double f : {880e6, 910e6, 915e6, 921e6, 960e6}) {
    const cd a = dip_gamma(s, f), b = rlc(f, 915e6, 12, 40);
    EXPECT_NEAR(a.real(), b.real(), 1e-12) << f;
    EXPECT_NEAR(a.imag(), b.imag(), 1e-12) << f;
  }
}

TEST(DipModels, QuarterWaveMonopoleIsResistiveAtItsQuarterWave) {
  // At kh = π/2: cot = 0 and sin² = 1, so Z = R (Balanis [memory]); 50 ohm gives Γ = 0.
  const DipShape s{DipModel::line_monopole, 915e6, 300, 50};
  EXPECT_NEAR(std::abs(dip_gamma(s, 915e6)), 0, 1e-12);
  // Above the quarter wave the element is inductive (X > 0: Im Γ > 0 near a match).
  EXPECT_GT(dip_gamma(s, 925e6).imag(), 0);
  EXPECT_NEAR(dip_resonance_hz(s, 890e6, 940e6), 915e6, 2e3);
}

// Runs the fit on a trace and compares with the rigorous interval and the truth.
struct Outcome {
  DipFit fit;
  double rigorous_half_width = 0;
};
Outcome run(const Trace& t, const DipFitSettings& settings = {}) {
  const std::size_t pk = peak_of(t.points);
  Outcome o;
  o.fit = fit_dip(t.points, pk, t.ctx, 9.5424, 0, settings);
  const Band r = resonance_interval(t.points, pk);
  o.rigorous_half_width = r.width_hz() / 2;
  return o;
}

// Every fit that is used holds the truth: both models, both couplers, test-port match from the
// common 25 dB to 45 dB, slow and fast turning error terms, eight leakage phases each.
TEST(DipFit, AUsedFitHoldsTheTrueResonance) {
  int used = 0, tried = 0;
  for (int model = 0; model < 2; ++model) {
    for (double match : {25.0, 45.0}) {
      for (double delay : {0.2e-9, 2e-9}) {
        for (double directivity : {25.0, 35.0}) {
          for (int k = 0; k < 8; ++k) {
            Bench b;
            b.directivity_db = directivity;
            b.source_match_db = match;
            b.error_delay_s = delay;
            b.phase = 2 * kPi * k / 8;
            b.seed = 100 + k;
            const DipShape mono{DipModel::line_monopole, 912e6, 420, 33};
            const double truth = model == 0 ? 917e6 : dip_resonance_hz(mono, 880e6, 950e6);
            const Trace t = measure(b, [&](double f) {
              // Each behind its own feed: 0.2 ns of line, 1 % loss.
              const cd feed = std::polar(0.99, -4 * kPi * f * 0.2e-9);
              return feed * (model == 0 ? rlc(f, 917e6, 15, 45) : dip_gamma(mono, f));
            });
            const Outcome o = run(t);
            ++tried;
            if (!o.fit.used) continue;
            ++used;
            EXPECT_LE(o.fit.resonance_low_hz, truth) << model << " " << match << " " << delay << " " << directivity << " " << k;
            EXPECT_GE(o.fit.resonance_high_hz, truth) << model << " " << match << " " << delay << " " << directivity << " " << k;
          }
        }
      }
    }
  }
  EXPECT_GT(used, tried / 2) << used << " of " << tried << " fits used";
}

// Half-width of the fitted interval over the rigorous one's, worst over eight leakage phases,
// for a Q-9 series RLC plugged straight into the port (no feed allowance) behind a slowly
// turning error vector (0.2 ns).
double worst_ratio(double source_match_db) {
  double worst = 0;
  for (int k = 0; k < 8; ++k) {
    Bench b;
    b.source_match_db = source_match_db;
    b.error_delay_s = 0.2e-9;
    b.phase = 2 * kPi * k / 8;
    b.seed = 300 + k;
    DipFitSettings direct;
    direct.unit_feed_delay_s = 0;
    const Outcome o = run(measure(b, [](double f) { return rlc(f, 915e6, 9, 45); }), direct);
    if (!o.fit.used) return 1e9;
    worst = std::max(worst, (o.fit.resonance_high_hz - o.fit.resonance_low_hz) / 2 / o.rigorous_half_width);
  }
  return worst;
}

TEST(DipFit, NarrowsTheIntervalWhenTheTestPortMatchIsWellBelowTheLeakage) {
  // 45 dB test-port match behind a 35 dB coupler: the fit places the resonance to about a
  // third of the rigorous interval (worst of eight phases 0.35 when this was written).
  EXPECT_LT(worst_ratio(45), 0.4);
}

TEST(DipFit, GainsNothingWhenTheSourceMatchIsAsLargeAsTheLeakage) {
  // 25 dB test-port match: the source match's re-reflection is indistinguishable, to the order
  // that places the resonance, from a shifted resonance plus leakage (MEASUREMENT.md), so the
  // bound stays near the rigorous interval (measured 0.9-1.1 when this was written).
  EXPECT_GT(worst_ratio(25), 0.7);
}

TEST(DipFit, RefusesADoubleDip) {
  Bench b;
  const Trace t = measure(b, [&](double f) {
    // Two resonances 14 MHz apart in series (a detuned parasitic element): not one dip.
    const cd g1 = rlc(f, 908e6, 25, 50), g2 = rlc(f, 922e6, 25, 50);
    const cd z = 50.0 * (1.0 + g1) / (1.0 - g1) + 50.0 * (1.0 + g2) / (1.0 - g2) - 50.0;
    return (z - 50.0) / (z + 50.0);
  });
  const Outcome o = run(t);
  EXPECT_FALSE(o.fit.used);
  EXPECT_FALSE(o.fit.refused.empty());
}

TEST(DipFit, RefusesABrokenFeedAndAnIntermittentOne) {
  Bench b;
  const Trace open = measure(b, [](double) { return cd(0.97, 0); });
  const DipFit broken = run(open).fit;
  EXPECT_FALSE(broken.used);
  EXPECT_NE(broken.refused.find("no dip"), std::string::npos) << broken.refused;
  const Trace good = measure(b, [](double f) { return rlc(f, 915e6, 11, 45); });
  const DipFit f = fit_dip(good.points, peak_of(good.points), good.ctx, 9.5424, 5);
  EXPECT_FALSE(f.used);
  EXPECT_NE(f.refused.find("erratic"), std::string::npos) << f.refused;
}

}  // namespace
}  // namespace echoline::core
