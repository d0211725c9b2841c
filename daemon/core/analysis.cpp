// Calibrated points and their figures (analysis.hpp).
#include "daemon/core/analysis.hpp"

#include <algorithm>
#include <cmath>
#include <limits>
#include <numbers>

#include "daemon/core/offset_pair_points.hpp"
#include "daemon/core/poly_fit.hpp"
#include "daemon/core/rf_math.hpp"
#include "daemon/core/uncertainty.hpp"

namespace echoline::core {
namespace {
constexpr double kInf = std::numeric_limits<double>::infinity();
// Points on a limit-segment edge count as inside it (plan frequencies are computed, not exact).
constexpr double kEdgeToleranceHz = kLimitEdgeToleranceHz;
}  // namespace

CalibratedTrace calibrate_points(const CalibrationRecord& cal, const std::vector<Reading>& dut,
                                 const std::vector<Reading>* offset, const UncertaintyBudget* leakage) {
  CalibratedTrace out;
  std::vector<OffsetPairInterval> pair;
  if (offset && offset->size() != dut.size()) offset = nullptr;
  if (offset && cal.budget.offset_line) {
    pair = offset_pair_intervals(cal.budget, cal.reference_dbm, dut, *offset, leakage);
    out.pair_sum = offset_pair_sum(cal.budget, cal.reference_dbm, dut, *offset, pair, leakage);
  }
  out.points.reserve(dut.size());
  out.shift.coverage_factor = cal.budget.coverage_factor;
  out.shift.error_delay_s = cal.budget.error_delay_s;
  out.shift.frequency_offset_hz = cal.budget.frequency_offset_hz;
  // Fast capture: the unit's reading may be up to half a bin off its frequency (0 otherwise).
  const std::vector<double> offset_db = frequency_offset_db(dut, cal.budget.frequency_offset_hz);
  std::vector<double> offset_u;
  {
    std::vector<double> f(dut.size()), sig(dut.size());
    for (std::size_t i = 0; i < dut.size(); ++i) {
      f[i] = dut[i].frequency_hz;
      sig[i] = reading_sigma_db(cal.budget, i, dut[i].raw_dbm);
    }
    offset_u = frequency_offset_sigma_db(f, sig, cal.budget.frequency_offset_hz);
  }
  for (std::size_t i = 0; i < dut.size(); ++i) {
    PointResult p;
    p.frequency_hz = dut[i].frequency_hz;
    p.raw_dbm = dut[i].raw_dbm;
    double rl = cal.reference_dbm[i] - dut[i].raw_dbm;
    const ReturnLossBounds b = budget_bounds(cal.budget, i, cal.reference_dbm[i], dut[i].raw_dbm, offset_db[i], offset_u[i]);
    if (b.clamped) {
      // Above the |Γ| = 1 reference: noise or drift; a passive DUT cannot reflect more than all.
      ++out.clamped_points;
      rl = 0;
    }
    p.return_loss_db = rl;
    p.return_loss_worst_db = std::min(b.worst_db, rl);
    p.return_loss_best_db = std::max(b.best_db, rl);
    if (offset) p.offset_raw_dbm = (*offset)[i].raw_dbm;
    if (!pair.empty()) out.direct.push_back(p);
    if (i < pair.size() && pair[i].usable) {
      // |Γ| from the direct reading alone, then intersected with the pair's.
      const double g_hi1 = b.worst_db <= 0 ? 1.0 : std::pow(10.0, -b.worst_db / 20);
      const double g_lo1 = std::isinf(b.best_db) ? 0.0 : std::pow(10.0, -b.best_db / 20);
      const double g_lo = std::max(g_lo1, pair[i].gamma_low);
      const double g_hi = std::min(g_hi1, pair[i].gamma_high);
      if (g_lo <= g_hi) {
        p.return_loss_worst_db = g_hi >= 1 ? 0.0 : -20 * std::log10(g_hi);
        p.return_loss_best_db = g_lo > 0 ? -20 * std::log10(g_lo) : std::numeric_limits<double>::infinity();
        // The value shown is the pair's own estimate (no leakage cross term), inside both.
        const double g_est = std::clamp(pair[i].gamma_estimate, g_lo, g_hi);
        p.return_loss_db = g_est >= 1 ? 0.0 : g_est > 0 ? -20 * std::log10(g_est) : p.return_loss_best_db;
        if (!std::isfinite(p.return_loss_db)) p.return_loss_db = std::clamp(rl, p.return_loss_worst_db, 200.0);
      } else {
        ++out.pair_disagreements;
        if (i < out.pair_sum.usable.size()) out.pair_sum.usable[i] = false;
      }
    }
    if (i < out.pair_sum.y.size()) {
      out.pair_sum.gamma_high.push_back(std::isfinite(p.return_loss_worst_db) ? std::pow(10.0, -p.return_loss_worst_db / 20) : 1.0);
      out.pair_sum.return_loss_db.push_back(p.return_loss_db);
    }
    out.points.push_back(p);
    out.shift.gamma_error.push_back(
        gamma_error_radius(cal.budget, i, cal.reference_dbm[i], dut[i].raw_dbm, offset_db[i], offset_u[i]));
    const double s_d = reading_sigma_db(cal.budget, i, dut[i].raw_dbm);
    const double s_r = cal.budget.reference_noise_db[i];
    out.shift.sigma_db.push_back(std::sqrt(s_d * s_d + s_r * s_r));
    out.shift.reading_sigma_db.push_back(s_d);
    out.shift.error_vector.push_back(cal.budget.directivity_bound[i] + cal.budget.coverage_factor * cal.budget.connection);
  }
  out.shift.source_match = cal.budget.source_match;
  return out;
}

std::optional<Vertex> parabola_vertex(double x0, double y0, double x1, double y1, double x2, double y2) {
  // Vertex of the interpolating parabola, written in offsets from x1 so that GHz-sized
  // frequencies lose no precision; works for unequal spacing (joints between segments).
  const double a = x0 - x1;
  const double b = x2 - x1;
  const double da = y0 - y1;
  const double db = y2 - y1;
  // y − y1 = p·t + q·t² through (a, da) and (b, db): q = (da/a − db/b)/(a − b), p = da/a − q·a.
  const double q = (da / a - db / b) / (a - b);
  if (!(q < 0)) return std::nullopt;  // flat or opening upward: no maximum
  const double p = da / a - q * a;
  const double t = -p / (2 * q);
  return Vertex{x1 + t, y1 + p * t + q * t * t};
}

// Where the TRUE return-loss maximum can lie (guarded window decisions).
//
// The one-port error bounds (MEASUREMENT.md §1 and §3: |Γ_true| ∈ [|Γ_m| − ρ_D − ρ_S|Γ_m|²,
// |Γ_m| + ρ_D + ρ_S|Γ_m|²], phases of E_D and E_S unknown) give, at every sample,
// RL_worst(f) ≤ RL_true(f) ≤ RL_best(f). Let f_p be the sample with the largest measured RL and
// f* the frequency of the true maximum. Then
//   RL_best(f*) ≥ RL_true(f*) ≥ RL_true(f_p) ≥ RL_worst(f_p),
// so f* lies where RL_best(f) ≥ RL_worst(f_p). The directivity error's phase turns with
// frequency, which tilts the measured curve and moves the apparent peak; this interval covers
// that shift without knowing the phase. Every sample where RL_best ≥ RL_worst(f_p) qualifies,
// also one in a second dip apart from the peak's (its true return loss may be the larger), so
// the interval runs from the first qualifying sample to the last: one interval covering every
// region. RL_best is interpolated linearly at its outer edges, and each edge widened by half
// the local point step because RL_best is known only at the samples. An interval reaching a
// sweep end is open: the maximum may lie beyond.
// Used for guarded acceptance of the resonance window (JCGM 106:2012 §8.3.2, clause from memory).
Band resonance_interval(const std::vector<PointResult>& points, std::size_t peak) {
  Band b;
  const double level = points[peak].return_loss_worst_db;
  const auto best = [&](std::size_t i) { return points[i].return_loss_best_db; };
  std::size_t lo = 0;
  while (lo < peak && !(best(lo) >= level)) ++lo;
  if (lo == 0) {
    b.low_hz = points.front().frequency_hz;
    b.low_open = true;
  } else {
    const double step = points[lo].frequency_hz - points[lo - 1].frequency_hz;
    b.low_hz = crossing_hz(points[lo].frequency_hz, best(lo), points[lo - 1].frequency_hz, best(lo - 1), level) -
               step / 2;
  }
  std::size_t hi = points.size() - 1;
  while (hi > peak && !(best(hi) >= level)) --hi;
  if (hi + 1 == points.size()) {
    b.high_hz = points.back().frequency_hz;
    b.high_open = true;
  } else {
    const double step = points[hi + 1].frequency_hz - points[hi].frequency_hz;
    b.high_hz = crossing_hz(points[hi].frequency_hz, best(hi), points[hi + 1].frequency_hz, best(hi + 1), level) +
                step / 2;
  }
  return b;
}

ShiftContext context_from_bounds(const std::vector<PointResult>& points, double error_delay_s) {
  ShiftContext c;
  c.error_delay_s = error_delay_s;
  c.coverage_factor = 0;
  for (const PointResult& p : points) {
    const double gm = std::pow(10.0, -p.return_loss_db / 20.0);
    const double hi = std::isfinite(p.return_loss_worst_db) ? std::pow(10.0, -p.return_loss_worst_db / 20.0) : 1.0;
    const double lo = std::isfinite(p.return_loss_best_db) ? std::pow(10.0, -p.return_loss_best_db / 20.0) : 0.0;
    c.gamma_error.push_back(std::max(hi - gm, gm - lo));
    c.sigma_db.push_back(0);
  }
  return c;
}

std::optional<ShiftBound> resonance_shift_bound(const std::vector<PointResult>& points, std::size_t peak,
                                                const ShiftContext& ctx) {
  const std::size_t n = points.size();
  if (n < 5 || peak >= n || ctx.gamma_error.size() != n || ctx.sigma_db.size() != n) return std::nullopt;
  const double peak_rl = points[peak].return_loss_db;
  if (!std::isfinite(peak_rl) || peak_rl < 12.0) return std::nullopt;  // shallow: the model does not hold
  std::size_t lo = peak, hi = peak;
  while (lo > 0 && points[lo - 1].return_loss_db >= peak_rl - 6.0) --lo;
  while (hi + 1 < n && points[hi + 1].return_loss_db >= peak_rl - 6.0) ++hi;
  if (peak - lo < 2 || hi - peak < 2) return std::nullopt;   // too sparse to fit
  if (lo == 0 || hi + 1 == n) return std::nullopt;           // broad: the dip runs off the sweep
  const double f_pk = points[peak].frequency_hz;
  std::vector<double> x, y;
  double e_max = 0, var_y = 0;
  for (std::size_t i = lo; i <= hi; ++i) {
    x.push_back((points[i].frequency_hz - f_pk) / 1e6);
    const double g2 = std::pow(10.0, -points[i].return_loss_db / 10.0);
    y.push_back(g2);
    e_max = std::max(e_max, ctx.gamma_error[i]);
    // σ of |Γ|² from a σ in dB: relative σ = σ_dB·ln(10)/10.
    const double s = g2 * ctx.sigma_db[i] * std::log(10.0) / 10.0;
    var_y += s * s;
  }
  const std::size_t m = x.size();
  double q[4], inv[4][4];
  if (!least_squares(x, y, 3, q, inv)) return std::nullopt;
  const double b = q[1], c = q[2];
  if (!(c > 0)) return std::nullopt;
  const double xv = -b / (2 * c);
  if (xv < x.front() || xv > x.back()) return std::nullopt;
  // Lopsided dip: the cubic's minimum near the vertex moves away from the quadratic's.
  const double slope = std::sqrt(c);  // |dΓ_m/df| per MHz
  const double step = 0.5 * std::max(points[peak + 1].frequency_hz - f_pk, f_pk - points[peak - 1].frequency_hz) / 1e6;
  // The quadratic's vertex stands for the measured curve's minimum; a cubic that places it
  // elsewhere says how far off that is (added below). Far off: the dip is lopsided.
  const double model_gap = std::fabs(cubic_minimum_near(x, y, xv) - xv);
  if (model_gap > std::max(2 * step, e_max / slope)) return std::nullopt;
  // Vertex uncertainty: residual scatter or the measured noise, whichever is larger.
  const double sigma_xv = vertex_sigma(x, y, q, inv, var_y / static_cast<double>(m));
  const double gamma_min = std::sqrt(std::max(0.0, y[peak - lo]));
  const double rotation = 2 * std::numbers::pi * ctx.error_delay_s * 1e6 * e_max;  // |dE/df| per MHz
  const double hw = e_max / slope + (gamma_min + e_max) * rotation / (slope * slope) +
                    ctx.coverage_factor * sigma_xv + model_gap + step;
  return ShiftBound{f_pk + xv * 1e6, hw * 1e6};
}

bool another_dip_qualifies(const std::vector<PointResult>& points, std::size_t peak) {
  const double level = points[peak].return_loss_worst_db;
  std::size_t lo = peak, hi = peak;
  while (lo > 0 && points[lo - 1].return_loss_best_db >= level) --lo;
  while (hi + 1 < points.size() && points[hi + 1].return_loss_best_db >= level) ++hi;
  for (std::size_t i = 0; i < points.size(); ++i) {
    if ((i < lo || i > hi) && points[i].return_loss_best_db >= level) return true;
  }
  return false;
}

std::optional<Resonance> find_resonance(const std::vector<PointResult>& points, const ShiftContext* context,
                                        const std::vector<PointResult>* shift_points, const PairSumTrace* pair_sum) {
  if (points.empty()) return std::nullopt;
  std::size_t best = 0;
  for (std::size_t i = 1; i < points.size(); ++i) {
    if (points[i].return_loss_db > points[best].return_loss_db) best = i;
  }
  Resonance r;
  r.index = best;
  r.frequency_hz = points[best].frequency_hz;
  r.depth_db = points[best].return_loss_db;
  const std::size_t n = points.size();
  const Band interval = resonance_interval(points, best);
  r.low_hz = r.rigorous_low_hz = interval.low_hz;
  r.high_hz = r.rigorous_high_hz = interval.high_hz;
  r.low_open = r.rigorous_low_open = interval.low_open;
  r.high_open = r.rigorous_high_open = interval.high_open;
  if (n == 1 || best == 0 || best == n - 1) {
    // The maximum is on the first or last point: the true resonance may lie outside the sweep
    // (resonance_interval is then open on that side, since the peak itself qualifies).
    r.at_edge = true;
    return r;
  }
  const PointResult& a = points[best - 1];
  const PointResult& m = points[best];
  const PointResult& c = points[best + 1];
  auto v = parabola_vertex(a.frequency_hz, a.return_loss_db, m.frequency_hz, m.return_loss_db,
                           c.frequency_hz, c.return_loss_db);
  if (v && v->x >= a.frequency_hz && v->x <= c.frequency_hz) {
    r.frequency_hz = v->x;
    r.depth_db = v->y;
    r.refined = true;
  }
  // The rigorous interval lets every point's error take its worst phase independently; the
  // coupler's and cable's errors are smooth over a dip, so where the dip meets the shift
  // bound's assumptions that interval is the tighter honest one (both hold: the intersection).
  // A second dip whose best case reaches the peak's worst case may hold the true maximum: the
  // shift bound, which follows one dip, does not apply, and the rigorous interval spans both.
  const std::vector<PointResult>& fitted = shift_points && shift_points->size() == n ? *shift_points : points;
  std::size_t fitted_peak = best;
  if (&fitted != &points) {
    for (std::size_t i = 0; i < n; ++i) {
      if (fitted[i].return_loss_db > fitted[fitted_peak].return_loss_db) fitted_peak = i;
    }
  }
  const ShiftContext own = context ? ShiftContext{} : context_from_bounds(fitted);
  if (auto sb = another_dip_qualifies(points, best)
                    ? std::nullopt
                    : resonance_shift_bound(fitted, fitted_peak, context ? *context : own)) {
    const double low = sb->center_hz - sb->half_width_hz;
    const double high = sb->center_hz + sb->half_width_hz;
    // Both intervals hold, so they overlap; when they do not (the direct reading's dip is not
    // the one the points' bounds single out, or a model failed) the shift bound is not used.
    const double f_fitted = fitted[fitted_peak].frequency_hz;
    const bool usable = f_fitted >= r.low_hz && f_fitted <= r.high_hz && std::max(low, r.low_hz) <= std::min(high, r.high_hz);
    if (usable && low > r.low_hz) {
      r.low_hz = low;
      r.low_open = false;
      r.shift_bound_used = true;
    }
    if (usable && high < r.high_hz) {
      r.high_hz = high;
      r.high_open = false;
      r.shift_bound_used = true;
    }
  }
  // The offset pair's sum: its vertex is the unit's own resonance to within the terms the sum
  // leaves (MEASUREMENT.md §12.1); it follows one dip, like the shift bound.
  if (pair_sum && pair_sum->y.size() == n && !another_dip_qualifies(points, best)) {
    if (auto pb = pair_shift_bound(*pair_sum, best)) {
      const double low = pb->center_hz - pb->half_width_hz;
      const double high = pb->center_hz + pb->half_width_hz;
      const bool inside = pb->center_hz >= r.rigorous_low_hz && pb->center_hz <= r.rigorous_high_hz;
      if (inside && !(std::max(low, r.low_hz) <= std::min(high, r.high_hz))) {
        // Both would hold, so they overlap; where they do not, one of their models failed:
        // the rigorous interval alone decides.
        r.low_hz = r.rigorous_low_hz;
        r.high_hz = r.rigorous_high_hz;
        r.low_open = r.rigorous_low_open;
        r.high_open = r.rigorous_high_open;
        r.shift_bound_used = false;
      } else if (inside) {
        if (low > r.low_hz) {
          r.low_hz = low;
          r.low_open = false;
          r.pair_bound_used = true;
        }
        if (high < r.high_hz) {
          r.high_hz = high;
          r.high_open = false;
          r.pair_bound_used = true;
        }
        if (r.pair_bound_used) r.frequency_hz = std::clamp(pb->center_hz, r.low_hz, r.high_hz);
      }
    }
  }
  // The refined vertex stays within the interval (it lies within half a step of the peak sample
  // for equal spacing; unequal spacing at a segment joint could take it slightly further; with
  // the offset pair the shift bound follows the direct reading's vertex, and the interval is
  // widened to the points' own, which only adds frequencies).
  r.low_hz = std::min(r.low_hz, r.frequency_hz);
  r.high_hz = std::max(r.high_hz, r.frequency_hz);
  return r;
}

double value_of(const PointResult& p, TraceValue which) {
  switch (which) {
    case TraceValue::measured: return p.return_loss_db;
    case TraceValue::worst: return p.return_loss_worst_db;
    case TraceValue::best: return p.return_loss_best_db;
  }
  return p.return_loss_db;
}

double crossing_hz(double f_a, double v_a, double f_b, double v_b, double level) {
  // An infinite value (best-case bound at |Γ| <= 0) lies above any level: the crossing is at
  // the finite neighbour.
  if (std::isinf(v_a)) return f_b;
  if (std::isinf(v_b)) return f_a;
  if (v_a == v_b) return (f_a + f_b) / 2;
  return f_a + (level - v_a) * (f_b - f_a) / (v_b - v_a);
}

std::optional<Band> find_band(const std::vector<PointResult>& points, std::size_t center,
                              double threshold_db, TraceValue which) {
  if (center >= points.size() || value_of(points[center], which) < threshold_db) return std::nullopt;
  Band band;
  std::size_t lo = center;
  while (lo > 0 && value_of(points[lo - 1], which) >= threshold_db) --lo;
  if (lo == 0) {
    band.low_hz = points[0].frequency_hz;
    band.low_open = true;
  } else if (which == TraceValue::worst) {
    band.low_hz = points[lo].frequency_hz;
  } else if (which == TraceValue::best) {
    band.low_hz = points[lo - 1].frequency_hz;
  } else {
    band.low_hz = crossing_hz(points[lo].frequency_hz, value_of(points[lo], which),
                              points[lo - 1].frequency_hz, value_of(points[lo - 1], which), threshold_db);
  }
  std::size_t hi = center;
  while (hi + 1 < points.size() && value_of(points[hi + 1], which) >= threshold_db) ++hi;
  if (hi + 1 == points.size()) {
    band.high_hz = points.back().frequency_hz;
    band.high_open = true;
  } else if (which == TraceValue::worst) {
    band.high_hz = points[hi].frequency_hz;
  } else if (which == TraceValue::best) {
    band.high_hz = points[hi + 1].frequency_hz;
  } else {
    band.high_hz = crossing_hz(points[hi].frequency_hz, value_of(points[hi], which),
                               points[hi + 1].frequency_hz, value_of(points[hi + 1], which), threshold_db);
  }
  return band;
}

std::vector<SegmentMargin> mask_margins(const std::vector<PointResult>& points,
                                        const std::vector<LimitSegment>& mask) {
  std::vector<SegmentMargin> out;
  for (const LimitSegment& seg : mask) {
    SegmentMargin m;
    m.segment = seg;
    m.measured_db = m.worst_db = m.best_db = kInf;
    for (const PointResult& p : points) {
      if (p.frequency_hz < seg.start_hz - kEdgeToleranceHz || p.frequency_hz > seg.stop_hz + kEdgeToleranceHz) continue;
      ++m.point_count;
      const double lim = seg.min_return_loss_db;
      if (p.return_loss_db - lim < m.measured_db || m.point_count == 1) {
        m.measured_db = p.return_loss_db - lim;
        m.measured_at_hz = p.frequency_hz;
      }
      if (p.return_loss_worst_db - lim < m.worst_db || m.point_count == 1) {
        m.worst_db = p.return_loss_worst_db - lim;
        m.worst_at_hz = p.frequency_hz;
      }
      if (p.return_loss_best_db - lim < m.best_db || m.point_count == 1) {
        m.best_db = p.return_loss_best_db - lim;
        m.best_at_hz = p.frequency_hz;
      }
    }
    out.push_back(m);
  }
  return out;
}

namespace {

// The dip fit (dip_fit.hpp) on a trace whose resonance was found: when a model passes, the
// resonance interval becomes its intersection with the fitted interval (both hold), and the
// resonance the unit's own, from the fit. An empty intersection refuses the fit.
void apply_fit(Resonance& r, const std::vector<PointResult>& pts, std::size_t peak, const ShiftContext& ctx,
               double threshold_db, int erratic_jumps, std::optional<DipFit>& out) {
  DipFitContext fc;
  fc.sigma_db = ctx.reading_sigma_db;
  fc.error_vector = ctx.error_vector;
  fc.source_match = ctx.source_match;
  fc.error_delay_s = ctx.error_delay_s;
  fc.coverage_factor = ctx.coverage_factor;
  out = fit_dip(pts, peak, fc, threshold_db, erratic_jumps);
  DipFit& f = *out;
  if (!f.used) return;
  const double low = std::max(r.low_hz, f.resonance_low_hz);
  const double high = std::min(r.high_hz, f.resonance_high_hz);
  if (!(low <= high)) {
    f.used = false;
    f.refused = "the fitted interval lies outside the interval the points allow";
    return;
  }
  if (f.resonance_low_hz > r.low_hz) r.low_open = false;
  if (f.resonance_high_hz < r.high_hz) r.high_open = false;
  r.fit_used = f.resonance_low_hz > r.low_hz || f.resonance_high_hz < r.high_hz;
  r.low_hz = low;
  r.high_hz = high;
  r.frequency_hz = std::clamp(f.resonance_hz, low, high);
}

}  // namespace

Analysis analyze(const Recipe& recipe, const CalibratedTrace& trace) {
  Analysis a;
  a.clamped_points = trace.clamped_points;
  const auto& pts = trace.points;
  a.max_return_loss_db = 0;
  for (const PointResult& p : pts) a.max_return_loss_db = std::max(a.max_return_loss_db, p.return_loss_db);
  for (std::size_t i = 1; i < pts.size(); ++i) {
    if (std::fabs(pts[i].return_loss_db - pts[i - 1].return_loss_db) > 6.0) ++a.erratic_jumps;
  }
  const bool have_context = trace.shift.gamma_error.size() == pts.size();
  // With the offset pair the shift bound and the dip fit work on the direct reading (their
  // derivations take one reading through a smooth error vector); the pair's points give the rest.
  const std::vector<PointResult>* direct = trace.direct.size() == pts.size() ? &trace.direct : nullptr;
  a.resonance = find_resonance(pts, have_context ? &trace.shift : nullptr, direct,
                               trace.pair_sum.y.size() == pts.size() ? &trace.pair_sum : nullptr);
  if (a.resonance && have_context && trace.shift.fit && trace.shift.error_vector.size() == pts.size()) {
    // The fit starts at the peak of the trace it fits.
    std::size_t peak = a.resonance->index;
    if (direct) {
      for (std::size_t i = 0; i < direct->size(); ++i) {
        if ((*direct)[i].return_loss_db > (*direct)[peak].return_loss_db) peak = i;
      }
    }
    apply_fit(*a.resonance, direct ? *direct : pts, peak, trace.shift, recipe.limits.bandwidth_threshold_db,
              a.erratic_jumps, a.fit);
  }
  if (a.resonance && have_context && trace.shift.frequency_offset_hz > 0) {
    // A fast capture reads the unit at f + δ, |δ| up to the offset, the same δ at every point:
    // the resonance found on the trace is the true one shifted by δ (MEASUREMENT.md §11).
    Resonance& r = *a.resonance;
    if (!r.low_open) r.low_hz -= trace.shift.frequency_offset_hz;
    if (!r.high_open) r.high_hz += trace.shift.frequency_offset_hz;
  }
  if (a.resonance) {
    const double thr = recipe.limits.bandwidth_threshold_db;
    a.band = find_band(pts, a.resonance->index, thr, TraceValue::measured);
    a.band_worst = find_band(pts, a.resonance->index, thr, TraceValue::worst);
    a.band_best = find_band(pts, a.resonance->index, thr, TraceValue::best);
  }
  a.margins = mask_margins(pts, recipe.limits.mask);
  return a;
}

}  // namespace echoline::core
