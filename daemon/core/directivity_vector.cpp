// The directivity vector from two known mismatches (directivity_vector.hpp).
//
// One-port error model (common practice, no source): a standard of reflection Γ reads
//   P = T + 20·log10|d + Γ/(1 − sΓ)| + n,
// so with the reference R (R − T bounded, MEASUREMENT.md §3.2) the reading relative to R gives
// |d + Γ'| = 10^((P − R + (R − T) − n)/20), Γ' = Γ/(1 − sΓ), |Γ' − Γ| ≤ |s|ρ²/(1 − |s|ρ).
// Every error of the standard (kit tolerance, source match) moves the circle's centre −Γ by at
// most t; the reference error and the noise widen its radius. The true d therefore lies in the
// intersection of two annuli about −Γ_A and −Γ_B with radii [r_lo − t, r_hi + t]. That region has
// two parts, one each side of the line through the centres; the part the LOAD's |d| or the
// OPEN/SHORT projection excludes is dropped. The bound is the largest distance from d̂ to any
// point of the remaining part, found exactly: the distance's extremes over a region bounded by
// circle arcs and a line segment lie at the curves' pairwise intersections or at a circle's
// point nearest to or farthest from d̂ (elementary geometry).
#include "daemon/core/directivity_vector.hpp"

#include <algorithm>
#include <array>
#include <cmath>
#include <limits>
#include <optional>
#include <vector>

#include <fmt/format.h>

#include "daemon/core/directivity_phase.hpp"
#include "daemon/core/frequency_text.hpp"
#include "daemon/core/uncertainty.hpp"
#include "daemon/core/uncertainty.hpp"

namespace echoline::core {
namespace {

using cd = std::complex<double>;
constexpr double kDbPerNeper = 8.685889638065035;  // 20·log10(e)
constexpr double kInf = std::numeric_limits<double>::infinity();

double cross(cd a, cd b) { return a.real() * b.imag() - a.imag() * b.real(); }
double dot(cd a, cd b) { return a.real() * b.real() + a.imag() * b.imag(); }

struct Circle {
  cd c;
  double r = 0;
};

struct Annulus {
  cd c;
  double r_in = 0, r_out = 0;
};

// The region: two annuli, and optionally one side of the line through `line_p` along `line_u`
// (side > 0: cross(line_u, x − line_p) ≥ 0; side < 0: ≤ 0; side == 0: both).
struct Region {
  std::array<Annulus, 2> ann;
  cd line_p, line_u{1, 0};
  int side = 0;
  bool contains(cd x) const {
    for (const Annulus& a : ann) {
      const double r = std::abs(x - a.c), tol = 1e-12 + 1e-9 * a.r_out;
      if (r < a.r_in - tol || r > a.r_out + tol) return false;
    }
    if (side != 0) {
      const double s = cross(line_u, x - line_p) * side;
      if (s < -1e-12) return false;
    }
    return true;
  }
};

// Intersections of two circles (0, 1 or 2 points; tangency within rounding counts as one).
void circle_circle(const Circle& a, const Circle& b, std::vector<cd>& out) {
  const cd dv = b.c - a.c;
  const double d = std::abs(dv);
  if (!(d > 0) || a.r <= 0 || b.r <= 0) return;
  const double x = (d * d + a.r * a.r - b.r * b.r) / (2 * d);
  double h2 = a.r * a.r - x * x;
  const double slack = 1e-12 * std::max(a.r, b.r) * std::max(a.r, b.r);
  if (h2 < -slack) return;
  h2 = std::max(h2, 0.0);
  const cd u = dv / d, base = a.c + x * u, perp = cd(-u.imag(), u.real());
  const double h = std::sqrt(h2);
  out.push_back(base + h * perp);
  if (h > 0) out.push_back(base - h * perp);
}

// Intersections of a circle and a line.
void circle_line(const Circle& c, cd p, cd u, std::vector<cd>& out) {
  if (c.r <= 0) return;
  const double t0 = dot(c.c - p, u);
  const cd foot = p + t0 * u;
  const double dist2 = std::norm(c.c - foot);
  const double h2 = c.r * c.r - dist2;
  if (h2 < -1e-12 * c.r * c.r) return;
  const double h = std::sqrt(std::max(h2, 0.0));
  out.push_back(foot + h * u);
  if (h > 0) out.push_back(foot - h * u);
}

// Every point where an extreme over the region of |x − p| (both senses) or of dot(x, q) can lie:
// the boundary curves' pairwise intersections, each circle's points nearest to and farthest from
// p and extreme along q, and the foot of p on the line. Only those inside the region.
std::vector<cd> extreme_candidates(const Region& g, const std::vector<cd>& targets, const std::vector<cd>& directions) {
  std::vector<Circle> circles;
  for (const Annulus& a : g.ann) {
    if (a.r_in > 0) circles.push_back({a.c, a.r_in});
    circles.push_back({a.c, a.r_out});
  }
  std::vector<cd> pts;
  for (std::size_t i = 0; i < circles.size(); ++i) {
    for (std::size_t j = i + 1; j < circles.size(); ++j) circle_circle(circles[i], circles[j], pts);
    if (g.side != 0) circle_line(circles[i], g.line_p, g.line_u, pts);
    for (cd p : targets) {
      const cd v = circles[i].c - p;
      const double n = std::abs(v);
      const cd u = n > 0 ? v / n : cd(1, 0);
      pts.push_back(circles[i].c + circles[i].r * u);
      pts.push_back(circles[i].c - circles[i].r * u);
    }
    for (cd q : directions) {
      const cd u = q / std::abs(q);
      pts.push_back(circles[i].c + circles[i].r * u);
      pts.push_back(circles[i].c - circles[i].r * u);
    }
  }
  if (g.side != 0) {
    for (cd p : targets) pts.push_back(g.line_p + dot(p - g.line_p, g.line_u) * g.line_u);
  }
  std::vector<cd> in;
  for (cd x : pts) {
    if (g.contains(x)) in.push_back(x);
  }
  for (cd p : targets) {
    if (g.contains(p)) in.push_back(p);   // an interior point can be the nearest to itself
  }
  return in;
}

struct Part {
  bool empty = true;
  double dist_max = 0;        // largest |x − d̂|
  double mag_min = kInf, mag_max = 0;
  double proj_min = kInf, proj_max = -kInf;
};

Part describe(const Region& g, cd d_hat, cd projection) {
  const cd proj_dir = std::conj(projection);   // Re(x·A) = dot(x, conj(A))
  const std::vector<cd> pts = extreme_candidates(g, {d_hat, cd(0, 0)}, {proj_dir});
  Part p;
  for (cd x : pts) {
    p.empty = false;
    p.dist_max = std::max(p.dist_max, std::abs(x - d_hat));
    p.mag_min = std::min(p.mag_min, std::abs(x));
    p.mag_max = std::max(p.mag_max, std::abs(x));
    const double pr = dot(x, proj_dir);
    p.proj_min = std::min(p.proj_min, pr);
    p.proj_max = std::max(p.proj_max, pr);
  }
  return p;
}

// The annulus of one standard: centre −Γ_model, radii from the reading at R − T ∈ [lo, hi] and
// the noise at ±u dB, widened by the centre's uncertainty t.
Annulus annulus_of(const MismatchReading& m, double lo_db, double hi_db, double u_db, double source_match) {
  const double rho = std::abs(m.gamma) + m.gamma_tolerance;
  const double sm = source_match * rho * rho / std::max(1 - source_match * rho, 1e-9);
  const double t = m.gamma_tolerance + sm;
  Annulus a;
  a.c = -m.gamma;
  a.r_in = std::max(0.0, std::pow(10.0, (m.level_db + lo_db - u_db) / 20) - t);
  a.r_out = std::pow(10.0, (m.level_db + hi_db + u_db) / 20) + t;
  return a;
}

}  // namespace

DirectivityEstimate solve_directivity(const DirectivityInputs& in) {
  DirectivityEstimate out;
  const double k = in.coverage_factor;
  const double lo = in.reference_error_low_db, hi = in.reference_error_high_db;
  const double mid = 0.5 * (lo + hi);
  // The nominal circles: the readings at the middle of the reference error, no noise.
  const Circle ca{-in.a.gamma, std::pow(10.0, (in.a.level_db + mid) / 20)};
  const Circle cb{-in.b.gamma, std::pow(10.0, (in.b.level_db + mid) / 20)};
  const cd axis = cb.c - ca.c;
  const double sep = std::abs(axis);
  if (!(sep > 0) || !std::isfinite(in.a.level_db) || !std::isfinite(in.b.level_db)) {
    out.problem = "the two mismatch standards coincide or a reading is not a number";
    return out;
  }
  const cd u = axis / sep;
  // The two nominal solutions (one each side of the centres' line); where the circles miss each
  // other (noise near tangency) the closest point on the line stands for both.
  std::vector<cd> nominal;
  circle_circle(ca, cb, nominal);
  cd plus, minus;
  if (nominal.empty()) {
    const double x = std::clamp((sep * sep + ca.r * ca.r - cb.r * cb.r) / (2 * sep), -ca.r, ca.r);
    plus = minus = ca.c + x * u;
  } else {
    plus = nominal[0];
    minus = nominal.size() > 1 ? nominal[1] : nominal[0];
    if (cross(u, plus - ca.c) < 0) std::swap(plus, minus);
  }
  const double ua = k * in.a.sigma_db, ub = k * in.b.sigma_db;
  Region whole;
  whole.ann = {annulus_of(in.a, lo, hi, ua, in.source_match), annulus_of(in.b, lo, hi, ub, in.source_match)};
  whole.line_p = ca.c;
  whole.line_u = u;
  Region sys = whole;
  sys.ann = {annulus_of(in.a, lo, hi, 0, in.source_match), annulus_of(in.b, lo, hi, 0, in.source_match)};

  auto admissible = [&](const Part& p) {
    if (p.empty) return false;
    if (p.mag_min > in.magnitude_high || p.mag_max < in.magnitude_low) return false;
    if (in.have_projection && (p.proj_max < in.projection_low || p.proj_min > in.projection_high)) return false;
    return true;
  };
  Region rp = whole, rm = whole;
  rp.side = 1;
  rm.side = -1;
  const Part pp = describe(rp, plus, in.projection), pm = describe(rm, minus, in.projection);
  const bool ok_p = admissible(pp), ok_m = admissible(pm);
  if (!ok_p && !ok_m) {
    out.problem = (pp.empty && pm.empty)
                      ? "the two mismatch readings admit no directivity vector (a standard is not the kit's, or loose)"
                      : "neither solution agrees with the LOAD's directivity and the OPEN/SHORT difference";
    return out;
  }
  out.solved = true;
  // A part that the LOAD or the OPEN/SHORT excludes holds no d, even where the two parts touch.
  if (ok_p != ok_m) {
    out.d = ok_p ? plus : minus;
    Region one = ok_p ? rp : rm, one_sys = sys;
    one_sys.side = one.side;
    one_sys.line_p = one.line_p;
    one_sys.line_u = one.line_u;
    out.bound = describe(one, out.d, in.projection).dist_max;
    out.bound_systematic = describe(one_sys, out.d, in.projection).dist_max;
  } else {
    // Both parts stay possible: the estimate is their middle and the bound covers both.
    out.ambiguous = true;
    out.d = 0.5 * (plus + minus);
    out.bound = describe(whole, out.d, in.projection).dist_max;
    out.bound_systematic = describe(sys, out.d, in.projection).dist_max;
  }
  // First-order noise: the estimate moves along the circles' normals, n_A·Δd = Δr_A and
  // n_B·Δd = Δr_B, Δr = r·σ/8.686.
  const cd na = out.d - ca.c, nb = out.d - cb.c;
  const double det = cross(na / std::abs(na), nb / std::abs(nb));
  if (std::fabs(det) > 1e-6 && !out.ambiguous) {
    const cd ea = na / std::abs(na), eb = nb / std::abs(nb);
    // Solve [ea; eb]·Δd = (Δr_A, Δr_B): Δd = (Δr_A·perp(eb) − Δr_B·perp(ea))/det, perp(v) = (v_y, −v_x).
    const cd va = cd(eb.imag(), -eb.real()) / det, vb = -cd(ea.imag(), -ea.real()) / det;
    const double dra = ca.r * in.a.sigma_db / kDbPerNeper, drb = cb.r * in.b.sigma_db / kDbPerNeper;
    out.sigma = std::hypot(std::abs(va) * dra, std::abs(vb) * drb);
  } else {
    out.sigma = out.bound / std::max(k, 1.0);
  }
  return out;
}

double mismatch_tolerance(double rho, double d_rho, double d_theta, double connection) {
  return std::hypot(d_rho, (rho + d_rho) * d_theta) + connection;
}

void add_directivity_vector(UncertaintyBudget& b, const CalibrationRecord& cal, const CalKit& kit,
                            const std::vector<Reading>& mismatch_a, const std::vector<Reading>& mismatch_b,
                            const MismatchModels& models, std::vector<std::string>& warnings) {
  const std::size_t n = b.frequency_hz.size();
  if (mismatch_a.size() != n || mismatch_b.size() != n || models.gamma_a.size() != n || models.gamma_b.size() != n ||
      cal.reference_dbm.size() != n) {
    return;
  }
  // |d| from the LOAD and Re(d·A) from OPEN − SHORT (MEASUREMENT.md §6.3). The projection there
  // is first order; what it leaves is bounded here by the second-order remainder of ln|1 + w|,
  // |w|²/(2(1 − |w|)), and of the source match's re-reflection, |s|²/(1 − |s|).
  CalibrationRecord with_budget = cal;
  with_budget.budget = b;
  const DirectivityPhase phase = recover_directivity_phase(with_budget, kit);
  const bool have_phase = phase.frequency_hz.size() == n;
  const double sm = b.source_match;
  const double m = std::min(kit.open.min_magnitude, kit.short_.min_magnitude);
  b.directivity_re.assign(n, 0);
  b.directivity_im.assign(n, 0);
  b.directivity_vector_bound.assign(n, 1);
  b.directivity_vector_systematic.assign(n, 1);
  b.directivity_vector_sigma.assign(n, 1);
  std::size_t unsolved = 0, ambiguous = 0, tightened = 0;
  b.directivity_bound_from_load = b.directivity_bound;
  std::string first_problem;
  double first_at = 0;
  // A fast capture reads each standard up to frequency_offset_hz off its plan frequency, the
  // mismatch standards too (MEASUREMENT.md §11): the bounded part widens the reference error the
  // reading is taken against, the noise part joins the reading's σ. 0 for a step sweep.
  const auto sigmas = [&](const std::vector<Reading>& t) {
    std::vector<double> s(n);
    for (std::size_t i = 0; i < n; ++i) s[i] = reading_sigma_db(b, i, t[i].raw_dbm);
    return s;
  };
  const std::vector<double> sigma_a = sigmas(mismatch_a), sigma_b = sigmas(mismatch_b);
  const std::vector<double> offset_a = frequency_offset_db(mismatch_a, b.frequency_offset_hz);
  const std::vector<double> offset_b = frequency_offset_db(mismatch_b, b.frequency_offset_hz);
  const std::vector<double> offset_u_a = frequency_offset_sigma_db(b.frequency_hz, sigma_a, b.frequency_offset_hz);
  const std::vector<double> offset_u_b = frequency_offset_sigma_db(b.frequency_hz, sigma_b, b.frequency_offset_hz);
  for (std::size_t i = 0; i < n; ++i) {
    const double f = b.frequency_hz[i];
    DirectivityInputs in;
    const double u_r = b.reference_noise_db[i];
    auto reading = [&](const Reading& r, std::complex<double> g, double tol, double s_r, double u_off) {
      return MismatchReading{g, tol, r.raw_dbm - cal.reference_dbm[i], std::sqrt(s_r * s_r + u_r * u_r + u_off * u_off)};
    };
    in.a = reading(mismatch_a[i], models.gamma_a[i], models.tolerance_a, sigma_a[i], offset_u_a[i]);
    in.b = reading(mismatch_b[i], models.gamma_b[i], models.tolerance_b, sigma_b[i], offset_u_b[i]);
    // P_x − T = level − e + (R − T) for a reading error e ∈ [−Δ, Δ]: the interval widens by Δ.
    const double off = std::max(offset_a[i], offset_b[i]);
    in.reference_error_low_db = b.reference_error_low_db[i] - off;
    in.reference_error_high_db = b.reference_error_high_db[i] + off;
    in.coverage_factor = b.coverage_factor;
    in.source_match = sm;
    in.magnitude_high = b.directivity_bound[i];
    if (have_phase) {
      in.magnitude_low = phase.magnitude_low[i];
      const double w = in.magnitude_high / m + sm / (1 - sm);
      if (w < 1) {
        const std::complex<double> go = open_gamma(kit.open, f), gs = short_gamma(kit.short_, f);
        in.have_projection = true;
        in.projection = 0.5 * (1.0 / go - 1.0 / gs);
        const double h = phase.real_part_bound[i] + w * w / (2 * (1 - w)) + sm * sm / (1 - sm);
        in.projection_low = phase.real_part[i] - h;
        in.projection_high = phase.real_part[i] + h;
      }
    }
    const DirectivityEstimate e = solve_directivity(in);
    if (!e.solved) {
      if (unsolved++ == 0) {
        first_problem = e.problem;
        first_at = f;
      }
      continue;
    }
    if (e.ambiguous) ++ambiguous;
    b.directivity_re[i] = e.d.real();
    b.directivity_im[i] = e.d.imag();
    b.directivity_vector_bound[i] = e.bound;
    b.directivity_vector_systematic[i] = e.bound_systematic;
    b.directivity_vector_sigma[i] = e.sigma;
    // Two bounds on |d| hold at once: the LOAD's (2) and |d̂| + r_d from the mismatches. The
    // smaller one is the directivity bound every interval uses; the LOAD's is kept beside it.
    const double by_vector = std::abs(e.d) + e.bound;
    if (by_vector < b.directivity_bound[i]) {
      b.directivity_bound[i] = by_vector;
      ++tightened;
    }
  }
  if (tightened > 0) {
    warnings.push_back(fmt::format("at {} of {} points the mismatch standards bound the directivity more tightly than "
                                   "the LOAD (|d̂| + r_d); the intervals there use that bound",
                                   tightened, n));
  }
  if (unsolved > 0) {
    warnings.push_back(fmt::format("the directivity vector could not be solved at {} of {} points (first at {}: {}); "
                                   "there the dip fit treats the leakage's phase as unknown",
                                   unsolved, n, format_mhz(first_at), first_problem));
  }
  if (ambiguous > 0) {
    warnings.push_back(fmt::format("at {} of {} points the mismatch readings leave two solutions for the directivity "
                                   "vector that the LOAD cannot tell apart; the bound there covers both",
                                   ambiguous, n));
  }
}

}  // namespace echoline::core
