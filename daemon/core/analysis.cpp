// Calibrated points and their figures (analysis.hpp).
#include "daemon/core/analysis.hpp"

#include <algorithm>
#include <cmath>
#include <limits>

#include "daemon/core/rf_math.hpp"

namespace echoline::core {
namespace {
constexpr double kInf = std::numeric_limits<double>::infinity();
// Points on a limit-segment edge count as inside it (plan frequencies are computed, not exact).
constexpr double kEdgeToleranceHz = 1e-3;
}  // namespace

CalibratedTrace calibrate_points(const CalibrationRecord& cal, const std::vector<Reading>& dut,
                                 double source_match_db) {
  CalibratedTrace out;
  out.points.reserve(dut.size());
  for (std::size_t i = 0; i < dut.size(); ++i) {
    PointResult p;
    p.frequency_hz = dut[i].frequency_hz;
    p.raw_dbm = dut[i].raw_dbm;
    double rl = cal.reference_dbm[i] - dut[i].raw_dbm;
    ReturnLossBounds b = return_loss_bounds(rl, cal.directivity_db[i], source_match_db);
    if (b.clamped) {
      // Above the |Γ| = 1 reference: noise or drift; a passive DUT cannot reflect more than all.
      ++out.clamped_points;
      rl = 0;
    }
    p.return_loss_db = rl;
    p.return_loss_worst_db = b.worst_db;
    p.return_loss_best_db = b.best_db;
    out.points.push_back(p);
  }
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
// The one-port error bounds (REFERENCE.md §2: |Γ_true| ∈ [|Γ_m| − ρ_D − ρ_S|Γ_m|²,
// |Γ_m| + ρ_D + ρ_S|Γ_m|²], phases of E_D and E_S unknown) give, at every sample,
// RL_worst(f) ≤ RL_true(f) ≤ RL_best(f). Let f_p be the sample with the largest measured RL and
// f* the frequency of the true maximum. Then
//   RL_best(f*) ≥ RL_true(f*) ≥ RL_true(f_p) ≥ RL_worst(f_p),
// so f* lies where RL_best(f) ≥ RL_worst(f_p). The directivity error's phase turns with
// frequency, which tilts the measured curve and moves the apparent peak; this interval covers
// that shift without knowing the phase. We take the contiguous region around f_p (a second
// region would be a second dip nearly as deep, not this resonance), interpolate RL_best
// linearly at its edges, and widen each edge by half the local point step because RL_best is
// known only at the samples. A region reaching a sweep end is open: the maximum may lie beyond.
// Used for guarded acceptance of the resonance window (JCGM 106:2012 §8.3.2, clause from memory).
Band resonance_interval(const std::vector<PointResult>& points, std::size_t peak) {
  Band b;
  const double level = points[peak].return_loss_worst_db;
  const auto best = [&](std::size_t i) { return points[i].return_loss_best_db; };
  std::size_t lo = peak;
  while (lo > 0 && best(lo - 1) >= level) --lo;
  if (lo == 0) {
    b.low_hz = points.front().frequency_hz;
    b.low_open = true;
  } else {
    const double step = points[lo].frequency_hz - points[lo - 1].frequency_hz;
    b.low_hz = crossing_hz(points[lo].frequency_hz, best(lo), points[lo - 1].frequency_hz, best(lo - 1), level) -
               step / 2;
  }
  std::size_t hi = peak;
  while (hi + 1 < points.size() && best(hi + 1) >= level) ++hi;
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

std::optional<double> resonance_shift_bound_hz(const std::vector<PointResult>& points, std::size_t peak) {
  // Derivation (one-port model of REFERENCE.md §2, first order; derived here, no published
  // source): near resonance Γ_t(f) ≈ Γ0 + k·(f − f0) with Re(conj(Γ0)·k) = 0 at the true
  // minimum. The reading is Γ_m = Γ_t + e with |e| <= eps, e nearly constant across the dip.
  // d|Γ_m|²/df = 0 gives (f_m − f0)·|k|² = −Re(conj(e)·k), so |f_m − f0| <= eps/|k|; and the
  // quadratic coefficient of |Γ_m(f)|² is |k|², whatever e is.
  const std::size_t n = points.size();
  if (n < 5 || peak >= n) return std::nullopt;
  const double peak_rl = points[peak].return_loss_db;
  if (!std::isfinite(peak_rl)) return std::nullopt;
  std::size_t lo = peak, hi = peak;
  while (lo > 0 && points[lo - 1].return_loss_db >= peak_rl - 6.0) --lo;
  while (hi + 1 < n && points[hi + 1].return_loss_db >= peak_rl - 6.0) ++hi;
  if (peak - lo < 2 || hi - peak < 2) return std::nullopt;
  // Least squares |Γ|² = a + b·x + c·x², x in MHz from the peak (conditioning).
  double s[5] = {0, 0, 0, 0, 0}, t[3] = {0, 0, 0};
  const double f_pk = points[peak].frequency_hz;
  for (std::size_t i = lo; i <= hi; ++i) {
    const double x = (points[i].frequency_hz - f_pk) / 1e6;
    const double g2 = std::pow(10.0, -points[i].return_loss_db / 10.0);
    double xp = 1;
    for (int k = 0; k < 5; ++k) {
      s[k] += xp;
      if (k < 3) t[k] += xp * g2;
      xp *= x;
    }
  }
  // Normal equations [s0 s1 s2; s1 s2 s3; s2 s3 s4]·[a b c] = t, solved by Cramer's rule.
  auto det3 = [](double a1, double a2, double a3, double b1, double b2, double b3, double c1, double c2,
                 double c3) { return a1 * (b2 * c3 - b3 * c2) - a2 * (b1 * c3 - b3 * c1) + a3 * (b1 * c2 - b2 * c1); };
  const double d = det3(s[0], s[1], s[2], s[1], s[2], s[3], s[2], s[3], s[4]);
  if (std::fabs(d) < 1e-300) return std::nullopt;
  const double c = det3(s[0], s[1], t[0], s[1], s[2], t[1], s[2], s[3], t[2]) / d;
  if (!(c > 0)) return std::nullopt;
  const double slope_per_mhz = std::sqrt(c);  // |dΓ/df|
  const double gamma_m = std::pow(10.0, -peak_rl / 20.0);
  const double worst = points[peak].return_loss_worst_db;
  const double eps = std::isfinite(worst) ? std::pow(10.0, -worst / 20.0) - gamma_m : 1.0;
  if (!(eps >= 0)) return std::nullopt;
  const double step_hz = 0.5 * std::max(points[std::min(peak + 1, n - 1)].frequency_hz - f_pk,
                                        f_pk - points[peak > 0 ? peak - 1 : 0].frequency_hz);
  return 1.25 * eps / slope_per_mhz * 1e6 + step_hz;
}

std::optional<Resonance> find_resonance(const std::vector<PointResult>& points) {
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
  r.low_hz = interval.low_hz;
  r.high_hz = interval.high_hz;
  r.low_open = interval.low_open;
  r.high_open = interval.high_open;
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
  // The bound interval above lets every point's error take its worst phase independently; the
  // coupler's and cable's errors are smooth over a dip, so where the dip can be fitted the
  // first-order shift bound is the tighter honest interval (both are kept: the intersection).
  if (auto hw = resonance_shift_bound_hz(points, best)) {
    const double low = r.frequency_hz - *hw;
    const double high = r.frequency_hz + *hw;
    if (low > r.low_hz) {  // tighter on the low side (an open side closes when inside the sweep)
      r.low_hz = low;
      r.low_open = false;
    }
    if (high < r.high_hz) {
      r.high_hz = high;
      r.high_open = false;
    }
  }
  // The refined vertex stays within the interval (it lies within half a step of the peak sample
  // for equal spacing; unequal spacing at a segment joint could take it slightly further).
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
  } else {
    band.low_hz = crossing_hz(points[lo].frequency_hz, value_of(points[lo], which),
                              points[lo - 1].frequency_hz, value_of(points[lo - 1], which), threshold_db);
  }
  std::size_t hi = center;
  while (hi + 1 < points.size() && value_of(points[hi + 1], which) >= threshold_db) ++hi;
  if (hi + 1 == points.size()) {
    band.high_hz = points.back().frequency_hz;
    band.high_open = true;
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

Analysis analyze(const Recipe& recipe, const CalibratedTrace& trace) {
  Analysis a;
  a.clamped_points = trace.clamped_points;
  const auto& pts = trace.points;
  a.max_return_loss_db = 0;
  for (const PointResult& p : pts) a.max_return_loss_db = std::max(a.max_return_loss_db, p.return_loss_db);
  a.resonance = find_resonance(pts);
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
