// Centring prediction (centring_prediction.hpp).
//
// The interval half-width is the resonance-shift bound of analysis.hpp evaluated for the
// nominal unit: hw = E/s + (|Γ_min| + E)·2πτ·E/s² + step/2, |Γ_min| from the nominal depth
// (default: E, a deep dip). Where the nominal dip fails that bound's assumptions (under 12 dB
// deep, or its 6 dB width, √3·|Γ_min|/s each side, reaching the sweep edge) the rigorous
// interval applies: |Γ_t| <= |Γ_min| + 2E around a dip |Γ_t|² = |Γ_min|² + (s·Δf)², so
// hw = sqrt((|Γ_min| + 2E)² − |Γ_min|²)/s + step/2. The slope s of a series resonance at its centre is |dΓ/df| = Q/f0·4·Z0·R/(R + Z0)²,
// taken at R = Z0 (its largest value; the unit's R is not known beforehand). From a bandwidth
// BW where |Γ| <= g: Q = 2·y·f0/BW with y = g/sqrt(1 − g²) (matched series resonance:
// Γ = jy/(1 + jy), y = Q·Δf/f0; derived here). A unit is inconclusive when its measured
// resonance lies within hw of a window edge.
#include "daemon/core/centring_prediction.hpp"

#include <algorithm>
#include <cmath>
#include <numbers>
#include <string>

#include <fmt/format.h>

#include "daemon/core/cal_kit.hpp"
#include "daemon/core/offset_pair.hpp"
#include "daemon/core/pair_shift_bound.hpp"
#include "daemon/core/rf_math.hpp"
#include "daemon/core/uncertainty.hpp"

namespace echoline::core {
namespace {

double normal_cdf(double z) { return 0.5 * std::erfc(-z / std::sqrt(2.0)); }

// Typical point step of the plan near f (half of it enters the bound).
double step_near(const Recipe& recipe, double f) {
  for (const Segment& s : recipe.segments) {
    if (s.points > 1 && f >= s.start_hz && f <= s.stop_hz) return (s.stop_hz - s.start_hz) / (s.points - 1);
  }
  const auto plan = plan_frequencies(recipe);
  return plan.size() > 1 ? (plan.back() - plan.front()) / static_cast<double>(plan.size() - 1) : 0;
}

double fraction(double hw, double lo, double hi, double center, std::optional<double> sd) {
  if (sd && *sd > 0) {
    auto p = [&](double a, double b) { return normal_cdf((b - center) / *sd) - normal_cdf((a - center) / *sd); };
    if (2 * hw >= hi - lo) return p(lo - hw, hi + hw);
    return p(lo - hw, lo + hw) + p(hi - hw, hi + hw);
  }
  return std::min(1.0, 2 * hw / (hi - lo));
}

}  // namespace

std::optional<CentringPrediction> predict_centring(const Recipe& recipe, const StationCapability& station,
                                                   double error_radius) {
  if (!recipe.limits.resonance_min_hz || !recipe.limits.resonance_max_hz) return std::nullopt;
  if (!recipe.nominal.q && !recipe.nominal.bandwidth_hz) return std::nullopt;
  const double lo = *recipe.limits.resonance_min_hz, hi = *recipe.limits.resonance_max_hz;
  CentringPrediction p;
  p.center_hz = recipe.nominal.center_hz ? *recipe.nominal.center_hz
                                         : recipe.trim ? recipe.trim->target_hz : (lo + hi) / 2;
  p.spread_hz = recipe.nominal.resonance_sd_hz;
  p.of_all_units = p.spread_hz.has_value();
  const double f0 = p.center_hz;
  if (recipe.nominal.q) {
    p.q = *recipe.nominal.q;
  } else {
    const double g = gamma_from_return_loss(recipe.limits.bandwidth_threshold_db);
    const double y = g / std::sqrt(1 - g * g);
    p.q = 2 * y * f0 / *recipe.nominal.bandwidth_hz;
  }
  p.slope_per_hz = p.q / f0;
  p.error_radius = error_radius;
  double tau = 2 * station.test_port_delay_s + 1e-9;   // the error delay (MEASUREMENT.md §6.2)
  const double step = step_near(recipe, f0);
  const auto plan = plan_frequencies(recipe);
  const double g0_given = recipe.nominal.depth_db ? gamma_from_return_loss(*recipe.nominal.depth_db) : -1;
  const double s = p.slope_per_hz;
  const bool shallow = recipe.nominal.depth_db && *recipe.nominal.depth_db < 12.0;
  const double reach = g0_given >= 0 ? std::sqrt(3.0) * g0_given / s : 0;
  p.rigorous = shallow || (!plan.empty() && (f0 - reach < plan.front() || f0 + reach > plan.back()));
  // The shift bound takes the largest error radius over the points it fits, out to twice
  // |Γ_min| (6 dB): there the reading noise and the source match add to the directivity bound.
  // Noise is taken as 0.05 dB per reading until a calibration has measured it (the typical
  // figure of a swept analyzer well above its floor; common practice, from memory).
  const double src = rho_from_db(station.source_match_db);
  auto radius_at_edge = [&](double e) {
    const double g_edge = 2 * (g0_given >= 0 ? g0_given : e);
    const double u = recipe.coverage_factor * 0.05 * std::sqrt(2.0);
    return e + g_edge * (std::pow(10.0, u / 20) - 1) + src * g_edge * g_edge;
  };
  // With the offset pair (MEASUREMENT.md §12) the points' bounds, hence the rigorous interval,
  // take what the pair leaves of a unit, the most over the dip (|Γ₀| to 2|Γ₀|: near the bottom
  // |Γ|² is small beside the leakage's own uncertainty); the shift bound still works on the
  // direct reading. Never more than one reading's radius.
  const std::optional<OffsetLine> pair_line =
      recipe.offset_pair && station.kit.offset_line ? station.kit.offset_line : std::nullopt;
  auto pair_radius = [&](double e) {
    const double one = radius_at_edge(e);
    if (!pair_line) return one;
    // e = |d| + L + k·u_conn from the LOAD reading |d| (MEASUREMENT.md §3.1): |d| is then at
    // least e − 2(L + k·u_conn).
    const double conn = recipe.coverage_factor * station.kit.connection_repeatability;
    const double spread = load_gamma_bound(station.kit, f0) + conn;
    const ReferenceErrorBounds re = reference_error_bounds(station.kit, f0, recipe.calibration.use_short, e, src);
    const double g_edge = 2 * (g0_given >= 0 ? g0_given : e);
    double worst = 0;
    for (int i = 0; i <= 8; ++i) {
      const double g = std::min(1.0, g_edge / 2 + (g_edge / 2) * i / 8.0);
      worst = std::max(worst, offset_pair_error_radius(g, f0, std::max(0.0, e - 2 * spread), e, src, conn, 0.05,
                                                       recipe.coverage_factor, *pair_line, one, re.low_db, re.high_db,
                                                       0.05 / std::sqrt(2.0)));
    }
    return worst;
  };
  // The pair's sum (MEASUREMENT.md §12.1): what the terms it leaves can move the vertex over the
  // 6, 3 and 1.5 dB windows, the smallest (the station intersects them).
  double kit_factor = 1;   // the kit's small figures scaled together (the advice below)
  auto pair_sum_half_width = [&](double e_dir, double g0) {
    const double conn = recipe.coverage_factor * station.kit.connection_repeatability;
    PairNuisance n;
    const double load = load_gamma_bound(station.kit, f0);
    n.leakage = std::max(0.0, e_dir - conn - load) + load * kit_factor;
    const double lr = (load + conn) * kit_factor;
    n.load_residual = src * lr < 1 ? lr / (1 - src * lr) : 1.0;
    n.connection = conn * kit_factor;
    n.source_match = src;
    n.error_delay_s = tau;
    n.line = *pair_line;
    n.line.match *= kit_factor;
    // The fit window reaches beyond the window's edges by the dip's 6 dB half-span, √3·|Γ₀|/s.
    const double span = std::sqrt(3.0) * std::max(g0, 0.01) / s;
    for (double f : {lo - span, hi + span, f0}) n.turn_error_rad = std::max(n.turn_error_rad, offset_turn_error(f, *pair_line));
    n.frequency_hz = std::max(lo - span, 1e6);   // the line's loss changes fastest at the lowest
    const ReferenceErrorBounds re = reference_error_bounds(station.kit, f0, recipe.calibration.use_short, e_dir, src);
    n.reference_ratio = std::max(std::pow(10.0, re.high_db / 10) - 1, 1 - std::pow(10.0, re.low_db / 10));
    cover_reference_turning(n, re.low_db, re.high_db, e_dir, src);
    // The points' upper bound is the unit's |Γ| plus the pair's radius.
    const double noise_rel = std::pow(10.0, recipe.coverage_factor * 0.05 / 10) - 1;
    return pair_shift_half_width(n, g0, pair_radius(e_dir), s, step, noise_rel);
  };
  std::string kind;   // which interval the last half_width() took
  auto half_width = [&](double e_dir) {
    const double e = radius_at_edge(e_dir);
    const double g0 = g0_given >= 0 ? g0_given : e;
    auto rigorous = [&](double r) { return std::sqrt((g0 + 2 * r) * (g0 + 2 * r) - g0 * g0) / s + step / 2; };
    const double shift = e / s + (g0 + e) * 2 * std::numbers::pi * tau * e / (s * s) + step / 2;
    kind = p.rigorous ? "rigorous" : "shift-bound";
    if (!pair_line) return p.rigorous ? rigorous(e) : shift;
    const double rig = rigorous(pair_radius(e_dir));
    if (p.rigorous) return rig;
    const double sum = pair_sum_half_width(e_dir, g0);
    const double hw = std::min({rig, shift, sum});
    kind = hw == sum ? "offset pair's sum" : hw == rig ? "rigorous" : "shift-bound";
    return hw;
  };
  p.half_width_hz = half_width(error_radius);
  const std::string interval_kind = kind;
  p.inconclusive_fraction = fraction(p.half_width_hz, lo, hi, p.center_hz, p.spread_hz);
  // The coupler directivity that would reach 5 %: E = ρ_D + (E − ρ_D_now); bisect on ρ_D.
  const double fixed = std::max(0.0, error_radius - rho_from_db(station.directivity_db));
  if (fraction(half_width(fixed), lo, hi, p.center_hz, p.spread_hz) <= 0.05) {
    double a = 0, b = 1;  // ρ_D
    for (int i = 0; i < 60; ++i) {
      const double m = (a + b) / 2;
      (fraction(half_width(fixed + m), lo, hi, p.center_hz, p.spread_hz) <= 0.05 ? a : b) = m;
    }
    if (a > 0) p.directivity_for_5_percent_db = -20 * std::log10(a);
  }
  // With the pair: how many dB better the kit's line match, connection and LOAD would all have
  // to be (the terms that set the sum's bound) for 5 %.
  if (pair_line && p.inconclusive_fraction > 0.05 && !p.rigorous) {
    auto at = [&](double gain_db) {
      kit_factor = std::pow(10.0, -gain_db / 20);
      const double f = fraction(half_width(error_radius), lo, hi, p.center_hz, p.spread_hz);
      kit_factor = 1;
      return f;
    };
    auto gain_for_5_percent = [&]() -> std::optional<double> {
      if (at(0) <= 0.05) return 0.0;
      if (at(40) > 0.05) return std::nullopt;
      double a = 0, b = 40;
      for (int i = 0; i < 40; ++i) {
        const double m = (a + b) / 2;
        (at(m) <= 0.05 ? b : a) = m;
      }
      return b;
    };
    p.kit_gain_for_5_percent_db = gain_for_5_percent();
    // The same with the test port at the coupler (no cable: the error terms turn over the
    // coupler's own 1 ns), which slows every turning term of the sum's bound.
    if (station.test_port_delay_s > 0) {
      const double keep = tau;
      tau = 1e-9;
      p.kit_gain_at_coupler_db = gain_for_5_percent();
      tau = keep;
    }
  }
  p.basis = fmt::format("Q {:.1f} at {:.3f} MHz, {}, error radius {:.4f} (|\u0393|{}), {} interval, {}", p.q, f0 / 1e6,
                        recipe.nominal.depth_db ? fmt::format("depth {:.1f} dB", *recipe.nominal.depth_db)
                                                : std::string("a deep dip"),
                        error_radius, pair_line ? fmt::format("; {:.4f} over the dip with the offset pair",
                                                              pair_radius(error_radius))
                                                : std::string(),
                        interval_kind,
                        p.spread_hz ? fmt::format("production spread {:.2f} MHz (s.d.)", *p.spread_hz / 1e6)
                                    : std::string("units spread evenly across the window"));
  return p;
}

std::optional<CentringPrediction> predict_centring(const Recipe& recipe, const StationCapability& station) {
  // Before calibration: the coupler's datasheet directivity plus the kit's LOAD residual and a
  // connection at the coverage factor (the calibration will measure the first).
  const double f = recipe.trim ? recipe.trim->target_hz
                   : recipe.limits.resonance_min_hz ? (*recipe.limits.resonance_min_hz + *recipe.limits.resonance_max_hz) / 2
                                                    : 0;
  const double e = rho_from_db(station.directivity_db) + load_gamma_bound(station.kit, f) +
                   recipe.coverage_factor * station.kit.connection_repeatability;
  return predict_centring(recipe, station, e);
}

}  // namespace echoline::core
