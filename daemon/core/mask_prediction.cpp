// Mask prediction (mask_prediction.hpp).
//
// The thresholds come from the judge's own interval (budget_bounds, MEASUREMENT.md §3.6) on a
// budget predicted for the station: the given error radius as the directivity bound, the kit's
// reference error for that radius, the station's source match, and a reading noise of 0.05 dB
// per reading (the figure centring_prediction also assumes until a calibration measures it).
// The nominal unit is a series resonance: z = r + jQ·(f/f_r − f_r/f), r = (1 − g0)/(1 + g0)
// (R below Z0, as a monopole's radiation resistance is), Γ = (z − 1)/(z + 1); with r = 1 it is
// the matched resonance of centring_prediction, |dΓ/df| = Q/f_r. A bandwidth gives Q through
// the same model at its depth. The unit's expected reading is |Γ + d(f)|, the coupler's leakage
// d of the given magnitude turning with the fixture's error delay; its phase is unknown before
// calibration, so each share is the mean over twelve phases (and its range over them), and over
// the normal spread of f_r. With the offset pair the thresholds are on the pair's estimate
// (the unit's own return loss, no leakage term), from the pair's error radius.
#include "daemon/core/mask_prediction.hpp"

#include <algorithm>
#include <cmath>
#include <complex>
#include <limits>
#include <numbers>

#include <fmt/format.h>

#include "daemon/core/cal_kit.hpp"
#include "daemon/core/dip_models.hpp"
#include "daemon/core/frequency_text.hpp"
#include "daemon/core/offset_pair.hpp"
#include "daemon/core/rf_math.hpp"
#include "daemon/core/uncertainty.hpp"

namespace echoline::core {
namespace {

constexpr double kInf = std::numeric_limits<double>::infinity();
constexpr double kAssumedNoiseDb = 0.05;   // per reading, until measured (common practice, from memory)
constexpr int kSpreadSteps = 401;          // resonances drawn over ±5 standard deviations
constexpr int kLeakagePhases = 12;         // phases of the coupler's leakage, evenly spread

struct MaskPoint {
  double f = 0;
  std::size_t segment = 0;
  double pass = 0, fail = 0;   // reading thresholds, dB
  // With the offset pair the thresholds are on the pair's estimate, which holds no leakage
  // cross term: the unit's own return loss stands for it.
  bool pair = false;
};

// The offset pair's thresholds at f (MEASUREMENT.md §12): on the unit's own return loss t, pass
// from the t where |Γ| + r(|Γ|) reaches the limit, fail below the t where |Γ| − r(|Γ|) does, r
// the pair's error radius (offset_pair_error_radius) for the leakage in [D_lo, D_hi]. False
// where the recipe has no pair or the line is too far from half a turn.
bool pair_thresholds(const Recipe& r, const StationCapability& st, double error_radius, double f, double limit_db,
                     double& pass, double& fail) {
  if (!r.offset_pair || !st.kit.offset_line || offset_turn_error(f, *st.kit.offset_line) > std::numbers::pi / 2) {
    return false;
  }
  const double conn = r.coverage_factor * st.kit.connection_repeatability;
  const double d_hi = std::max(0.0, error_radius - conn);
  const double d_lo = std::max(0.0, d_hi - 2 * (load_gamma_bound(st.kit, f) + conn));
  const double src = rho_from_db(st.source_match_db);
  const double limit = gamma_from_return_loss(limit_db);
  const ReferenceErrorBounds re = reference_error_bounds(st.kit, f, r.calibration.use_short, d_hi, src);
  auto radius = [&](double g) {
    return offset_pair_error_radius(g, f, d_lo, d_hi, src, conn, kAssumedNoiseDb, r.coverage_factor,
                                    *st.kit.offset_line, 1.0, re.low_db, re.high_db, kAssumedNoiseDb / std::sqrt(2.0));
  };
  // Pass: the largest |Γ| with |Γ| + r ≤ limit; fail: the smallest with |Γ| − r > limit.
  double lo = 0, hi = limit;
  for (int i = 0; i < 50; ++i) {
    const double m = (lo + hi) / 2;
    (m + radius(m) <= limit ? lo : hi) = m;
  }
  pass = lo > 0 ? -20 * std::log10(lo) : kInf;
  lo = limit, hi = 1;
  if (1 - radius(1) <= limit) {
    fail = 0;
  } else {
    for (int i = 0; i < 50; ++i) {
      const double m = (lo + hi) / 2;
      (m - radius(m) > limit ? hi : lo) = m;
    }
    fail = -20 * std::log10(hi);
  }
  return true;
}

// Reading thresholds at one frequency for a limit, from a one-point predicted budget.
void thresholds(const Recipe& r, const StationCapability& st, double error_radius, double f, double limit_db,
                double& pass, double& fail) {
  UncertaintyBudget b;
  b.coverage_factor = r.coverage_factor;
  b.source_match = rho_from_db(st.source_match_db);
  b.connection = st.kit.connection_repeatability;
  b.noise_floor_dbm = st.noise_floor_dbm;
  const double ref_dbm = expected_reflection_dbm(r.source.power_dbm, st);
  b.noise.push_back(SegmentNoise{f - 1, f + 1, 0, kAssumedNoiseDb, kAssumedNoiseDb, ref_dbm - st.directivity_db, true});
  b.frequency_hz = {f};
  const double dir = std::max(0.0, error_radius - r.coverage_factor * b.connection);
  const ReferenceErrorBounds re = reference_error_bounds(st.kit, f, r.calibration.use_short, dir, b.source_match);
  b.reference_error_low_db = {re.low_db};
  b.reference_error_high_db = {re.high_db};
  b.reference_noise_db = {kAssumedNoiseDb / std::sqrt(2.0)};
  b.directivity_bound = {dir};
  b.directivity_measured = {dir};
  b.load_residual = {load_gamma_bound(st.kit, f)};
  auto bounds = [&](double rl) { return budget_bounds(b, 0, ref_dbm, ref_dbm - rl); };
  // The worst case rises with the reading's return loss until the receiver's noise takes over
  // (deep readings lie near the floor): find its top on a 0.25 dB grid, then bisect below it.
  double top = 0, top_worst = -kInf;
  for (double rl = 0; rl <= 100; rl += 0.25) {
    const double w = bounds(rl).worst_db;
    if (w > top_worst) {
      top_worst = w;
      top = rl;
    }
  }
  if (top_worst < limit_db) {
    pass = kInf;
  } else {
    double lo = 0, hi = top;
    for (int i = 0; i < 50; ++i) {
      const double m = (lo + hi) / 2;
      (bounds(m).worst_db >= limit_db ? hi : lo) = m;
    }
    pass = hi;
  }
  double lo = 0, hi = 100;
  if (!(bounds(0).best_db < limit_db)) {
    fail = 0;
    return;
  }
  for (int i = 0; i < 50; ++i) {
    const double m = (lo + hi) / 2;
    (bounds(m).best_db < limit_db ? lo : hi) = m;
  }
  fail = lo;
}

std::vector<MaskPoint> mask_points(const Recipe& r, const StationCapability& st, double error_radius) {
  std::vector<MaskPoint> out;
  for (double f : plan_frequencies(r)) {
    for (std::size_t k = 0; k < r.limits.mask.size(); ++k) {
      const LimitSegment& m = r.limits.mask[k];
      if (f < m.start_hz - 1e-3 || f > m.stop_hz + 1e-3) continue;
      MaskPoint p;
      p.f = f;
      p.segment = k;
      p.pair = pair_thresholds(r, st, error_radius, f, m.min_return_loss_db, p.pass, p.fail);
      if (!p.pair) thresholds(r, st, error_radius, f, m.min_return_loss_db, p.pass, p.fail);
      out.push_back(p);
    }
  }
  return out;
}

// The unit and the bench as the prediction models them.
struct UnitModel {
  double q = 0, g0 = 0;
  double leakage = 0;        // |d|
  double error_delay_s = 0;  // d turns as e^(−j2πτ(f − f_c))
  double center_hz = 0;
  // Line monopole: its shape at a quarter-wave frequency of 1 GHz, and where its dip lies then.
  bool monopole = false;
  DipShape shape;
  double min_at_1ghz = 1e9;
};

std::complex<double> unit_gamma(double f, double f_r, const UnitModel& u) {
  if (u.monopole) {
    // A longer or shorter element scales the whole curve in frequency (kh ∝ f/f_q).
    DipShape s = u.shape;
    s.a = 1e9 * f_r / u.min_at_1ghz;
    return dip_gamma(s, f);
  }
  const double rr = (1 - u.g0) / (1 + u.g0);
  const std::complex<double> z(rr, u.q * (f / f_r - f_r / f));
  return (z - 1.0) / (z + 1.0);
}

// The monopole's smallest |Γ| and where, and its relative width where |Γ| <= g (inf: never
// reaches g on one side within 0.3–2 f_q), at f_q = 1 GHz.
struct MonopoleDip {
  double f_min = 0, g_min = 1, relative_width = 0;
};
MonopoleDip monopole_dip(double z_a, double r_ohm, double g) {
  const DipShape s{DipModel::line_monopole, 1e9, z_a, r_ohm};
  MonopoleDip d;
  d.f_min = dip_resonance_hz(s, 0.7e9, 1.3e9);
  d.g_min = std::abs(dip_gamma(s, d.f_min));
  if (!(d.g_min < g)) {
    d.relative_width = 0;
    return d;
  }
  auto crossing = [&](double inside, double outside) {
    if (std::abs(dip_gamma(s, outside)) < g) return std::numeric_limits<double>::quiet_NaN();
    for (int i = 0; i < 60; ++i) {
      const double m = (inside + outside) / 2;
      (std::abs(dip_gamma(s, m)) < g ? inside : outside) = m;
    }
    return (inside + outside) / 2;
  };
  const double lo = crossing(d.f_min, 0.3e9), hi = crossing(d.f_min, 2e9);
  d.relative_width = std::isfinite(lo) && std::isfinite(hi) ? (hi - lo) / d.f_min : kInf;
  return d;
}

// The monopole (Z_a, R below Z0) whose dip has depth |Γ| = g0 and relative width w at |Γ| = g:
// R by bisection for the depth (the dip deepens as R rises towards Z0), Z_a by bisection on a
// log scale for the width (a thicker element, lower Z_a, is broader). False when none does.
bool fit_monopole(double g0, double w, double g, UnitModel& u) {
  auto r_for_depth = [&](double z_a) {
    double lo = 0.5, hi = 49.99;
    for (int i = 0; i < 40; ++i) {
      const double m = (lo + hi) / 2;
      (monopole_dip(z_a, m, g).g_min > g0 ? lo : hi) = m;
    }
    return (lo + hi) / 2;
  };
  double lo = std::log(20.0), hi = std::log(5000.0);
  for (int i = 0; i < 40; ++i) {
    const double m = (lo + hi) / 2;
    const double z_a = std::exp(m);
    (monopole_dip(z_a, r_for_depth(z_a), g).relative_width > w ? lo : hi) = m;
  }
  const double z_a = std::exp((lo + hi) / 2);
  const double r = r_for_depth(z_a);
  const MonopoleDip d = monopole_dip(z_a, r, g);
  if (!(std::fabs(d.relative_width - w) < 0.02 * w) || !(std::fabs(d.g_min - g0) < 0.01)) return false;
  u.monopole = true;
  u.shape = DipShape{DipModel::line_monopole, 1e9, z_a, r};
  u.min_at_1ghz = d.f_min;
  return true;
}

double reading_rl(double f, double f_r, const UnitModel& u, double theta) {
  const std::complex<double> d = std::polar(u.leakage, theta - 2 * std::numbers::pi * u.error_delay_s * (f - u.center_hz));
  const double g = std::abs(unit_gamma(f, f_r, u) + d);
  return g > 0 ? -20 * std::log10(g) : 300.0;
}

// 0 pass, 1 inconclusive, 2 fail: the unit's readings against every point's thresholds.
int outcome(const std::vector<MaskPoint>& pts, double f_r, const UnitModel& u, double theta) {
  UnitModel without_leakage = u;   // the pair's estimate holds no leakage term
  without_leakage.leakage = 0;
  int worst = 0;
  for (const MaskPoint& p : pts) {
    const double rl = p.pair ? reading_rl(p.f, f_r, without_leakage, 0) : reading_rl(p.f, f_r, u, theta);
    if (rl < p.fail) return 2;
    if (rl < p.pass) worst = 1;
  }
  return worst;
}

struct Shares {
  double pass = 0, inconclusive = 0, fail = 0;
  double inconclusive_low = 1, inconclusive_high = 0;   // over the leakage's phases
};

Shares shares(const std::vector<MaskPoint>& pts, std::optional<double> sd, const UnitModel& u) {
  Shares s;
  const bool spread = sd && *sd > 0;
  for (int k = 0; k < kLeakagePhases; ++k) {
    const double theta = 2 * std::numbers::pi * k / kLeakagePhases;
    double share[3] = {0, 0, 0}, total = 0;
    auto add = [&](int o, double w) {
      share[o] += w;
      total += w;
    };
    if (!spread) {
      add(outcome(pts, u.center_hz, u, theta), 1.0);
    } else {
      for (int i = 0; i < kSpreadSteps; ++i) {
        const double z = -5.0 + 10.0 * i / (kSpreadSteps - 1);
        add(outcome(pts, u.center_hz + z * *sd, u, theta), std::exp(-0.5 * z * z) * (i == 0 || i == kSpreadSteps - 1 ? 0.5 : 1.0));
      }
    }
    s.pass += share[0] / total / kLeakagePhases;
    s.inconclusive += share[1] / total / kLeakagePhases;
    s.fail += share[2] / total / kLeakagePhases;
    s.inconclusive_low = std::min(s.inconclusive_low, share[1] / total);
    s.inconclusive_high = std::max(s.inconclusive_high, share[1] / total);
  }
  return s;
}

// Q of the model from a bandwidth at |Γ| <= g, at depth g0: the reactance x = Q·(f/f_r − f_r/f)
// where |Γ| = g solves (r − 1)² + x² = g²((r + 1)² + x²).
double q_from_bandwidth(double bandwidth_hz, double f_r, double g, double g0) {
  const double r = (1 - g0) / (1 + g0);
  const double x2 = (g * g * (r + 1) * (r + 1) - (r - 1) * (r - 1)) / (1 - g * g);
  if (!(x2 > 0)) return 0;
  // The series dip is geometrically symmetric: f/f_r − f_r/f = ±x/Q at its two crossings, whose
  // distance is exactly f_r·x/Q.
  return std::sqrt(x2) * f_r / bandwidth_hz;
}

}  // namespace

std::optional<MaskPrediction> predict_mask(const Recipe& recipe, const StationCapability& station, double error_radius,
                                          double leakage) {
  if (recipe.limits.mask.empty()) return std::nullopt;
  MaskPrediction p;
  p.error_radius = error_radius;
  const std::vector<MaskPoint> pts = mask_points(recipe, station, error_radius);
  for (std::size_t k = 0; k < recipe.limits.mask.size(); ++k) {
    const LimitSegment& m = recipe.limits.mask[k];
    MaskGuard g{k, m.start_hz, m.stop_hz, m.min_return_loss_db, -kInf, kInf};
    for (const MaskPoint& q : pts) {
      if (q.segment != k) continue;
      g.pass_reading_db = std::max(g.pass_reading_db, q.pass);
      g.fail_reading_db = std::min(g.fail_reading_db, q.fail);
    }
    if (!std::isfinite(g.fail_reading_db)) g.fail_reading_db = m.min_return_loss_db;
    if (g.pass_reading_db == -kInf) g.pass_reading_db = m.min_return_loss_db;
    p.guards.push_back(g);
  }
  const NominalUnit& n = recipe.nominal;
  p.center_hz = n.center_hz ? *n.center_hz : recipe.trim ? recipe.trim->target_hz : 0;
  if (p.center_hz <= 0) {
    double lo = kInf, hi = -kInf;
    for (const LimitSegment& m : recipe.limits.mask) {
      lo = std::min(lo, m.start_hz);
      hi = std::max(hi, m.stop_hz);
    }
    p.center_hz = (lo + hi) / 2;
  }
  p.leakage = leakage;
  p.basis = fmt::format("error radius {:.4f} and leakage {:.4f} (|\u0393|), reading noise {:.2f} dB assumed, coverage factor {:g}{}",
                        error_radius, leakage, kAssumedNoiseDb, recipe.coverage_factor,
                        std::any_of(pts.begin(), pts.end(), [](const MaskPoint& q) { return q.pair; })
                            ? ", the offset pair's thresholds (on its estimate, no leakage cross term)"
                            : "");
  if ((!n.q && !n.bandwidth_hz) || pts.empty()) return p;
  p.have_unit = true;
  const double g0 = n.depth_db ? gamma_from_return_loss(*n.depth_db) : 0.0;
  p.depth_db = n.depth_db.value_or(std::numeric_limits<double>::infinity());
  if (n.q) {
    p.q = *n.q;
  } else {
    p.q = q_from_bandwidth(*n.bandwidth_hz, p.center_hz, gamma_from_return_loss(recipe.limits.bandwidth_threshold_db), g0);
    if (!(p.q > 0)) {
      p.have_unit = false;   // the nominal dip never reaches the bandwidth threshold
      return p;
    }
  }
  p.spread_hz = n.resonance_sd_hz;
  p.of_all_units = p.spread_hz && *p.spread_hz > 0;
  UnitModel u{p.q, g0, leakage, 2 * station.test_port_delay_s + 1e-9, p.center_hz};
  std::string shape = "series resonance";
  if (n.line_monopole) {
    // The same dip as a line monopole: the series form's width at the threshold (exact when the
    // recipe gives the bandwidth) and its depth.
    const double g = gamma_from_return_loss(recipe.limits.bandwidth_threshold_db);
    const double r = (1 - g0) / (1 + g0);
    const double x = std::sqrt(std::max(0.0, (g * g * (r + 1) * (r + 1) - (r - 1) * (r - 1)) / (1 - g * g)));
    const double d = x / p.q;   // f/f_r − f_r/f at the crossing
    const double t = (d + std::sqrt(d * d + 4)) / 2;
    const double w = n.bandwidth_hz ? *n.bandwidth_hz / p.center_hz : t - 1 / t;
    if (!fit_monopole(std::max(g0, 1e-3), w, g, u)) {
      p.have_unit = false;
      p.basis = "no line monopole has the nominal unit's depth and bandwidth; " + p.basis;
      return p;
    }
    shape = fmt::format("line monopole Z_a {:.0f} ohm, R {:.1f} ohm", u.shape.b, u.shape.c);
  }
  p.nominal_margin_db = kInf;
  for (const MaskPoint& q : pts) {
    const double g = std::abs(unit_gamma(q.f, p.center_hz, u));
    p.nominal_margin_db = std::min(p.nominal_margin_db, (g > 0 ? -20 * std::log10(g) : 300.0) - q.pass);
  }
  const Shares s = shares(pts, p.spread_hz, u);
  p.pass_fraction = s.pass;
  p.inconclusive_fraction = s.inconclusive;
  p.fail_fraction = s.fail;
  p.inconclusive_low = s.inconclusive_low;
  p.inconclusive_high = s.inconclusive_high;
  if (p.of_all_units && p.inconclusive_fraction > 0.05) {
    // E = (E − ρ_D now) + ρ_D, the leakage ρ_D: bisect on the coupler's own ρ_D (the share
    // falls as ρ_D does).
    const double fixed = std::max(0.0, error_radius - leakage);
    auto share_at = [&](double rho_d) {
      UnitModel v = u;
      v.leakage = rho_d;
      return shares(mask_points(recipe, station, fixed + rho_d), p.spread_hz, v).inconclusive;
    };
    if (share_at(0) <= 0.05) {
      double a = 0, b = std::max(leakage, rho_from_db(station.directivity_db));
      for (int i = 0; i < 24; ++i) {
        const double m = (a + b) / 2;
        (share_at(m) <= 0.05 ? a : b) = m;
      }
      if (a > 0) p.directivity_for_5_percent_db = -20 * std::log10(a);
    }
  }
  p.basis = fmt::format("{}, Q {:.1f} at {:.3f} MHz, {}, {}, ", shape, p.q, p.center_hz / 1e6,
                        n.depth_db ? fmt::format("depth {:.1f} dB", *n.depth_db) : std::string("a deep dip"),
                        p.of_all_units ? fmt::format("production spread {:.2f} MHz (s.d.)", *p.spread_hz / 1e6)
                                       : std::string("the nominal unit alone")) +
            p.basis;
  return p;
}

std::optional<MaskPrediction> predict_mask(const Recipe& recipe, const StationCapability& station) {
  double e = 0;
  for (const LimitSegment& m : recipe.limits.mask) {
    for (double f : {m.start_hz, m.stop_hz}) {
      // The judge's e = |E_D|max + k·u_conn, |E_D|max itself holding the LOAD's connection:
      // two connections at the coverage factor.
      e = std::max(e, rho_from_db(station.directivity_db) + load_gamma_bound(station.kit, f) +
                          2 * recipe.coverage_factor * station.kit.connection_repeatability);
    }
  }
  return predict_mask(recipe, station, e, rho_from_db(station.directivity_db));
}

}  // namespace echoline::core
