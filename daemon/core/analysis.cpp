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
  if (n == 1) {
    r.at_edge = true;
    return r;
  }
  if (best == 0 || best == n - 1) {
    // The maximum is on the first or last point: the true resonance may lie outside the sweep.
    r.at_edge = true;
    const std::size_t other = best == 0 ? 1 : n - 2;
    r.uncertainty_hz = std::fabs(points[other].frequency_hz - points[best].frequency_hz) / 2;
    return r;
  }
  const PointResult& a = points[best - 1];
  const PointResult& m = points[best];
  const PointResult& c = points[best + 1];
  // Frequency uncertainty for decisions: half the local point spacing. The parabola is exact
  // only for a parabolic dip; a real dip is not one and noise moves the vertex, while a vertex
  // can never move more than half a step from the sample that is the maximum of a smooth dip.
  // Deriving an interval from the RL bounds would need the (unknown) phase of the error terms.
  r.uncertainty_hz = std::max(m.frequency_hz - a.frequency_hz, c.frequency_hz - m.frequency_hz) / 2;
  auto v = parabola_vertex(a.frequency_hz, a.return_loss_db, m.frequency_hz, m.return_loss_db,
                           c.frequency_hz, c.return_loss_db);
  if (v && v->x >= a.frequency_hz && v->x <= c.frequency_hz) {
    r.frequency_hz = v->x;
    r.depth_db = v->y;
    r.refined = true;
  }
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
