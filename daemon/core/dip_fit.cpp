// The dip fit (dip_fit.hpp). Model, bound and test: MEASUREMENT.md, "Fitting the unit".
//
// Reading model over the fit window, x = f − f_c (f_c the peak sample):
//   |Γ_m(f)| = | K + K1·x + e^(−j2π·τ·x)·Γ_u(f; shape) |
// K + K1·x is the bench's error vector (directivity leakage and everything constant over the
// dip) to first order in x; e^(−j2πτx) the unit's feed line; Γ_u the unit's own reflection.
// Levenberg–Marquardt on the amplitude residuals (|Γ_m| − a_i)/σ_i (Levenberg 1944, Marquardt
// 1963), Jacobian analytic in K, K1 and τ and by forward differences in the shape.
#include "daemon/core/dip_fit.hpp"

#include <algorithm>
#include <array>
#include <cmath>
#include <complex>
#include <limits>
#include <numbers>

#include <fmt/format.h>

namespace echoline::core {
namespace {

using cd = std::complex<double>;
constexpr int kParams = 8;  // Re K, Im K, Re K1, Im K1 (per MHz), τ (ns), shape a − f_c (MHz), ln b, ln c
constexpr double kDbPerNeper = 8.685889638065035;  // 20·log10(e)
using Vec = std::array<double, kParams>;
using Mat = std::array<Vec, kParams>;

struct Window {
  std::vector<double> f, x, a, sigma, eps;  // x in MHz from f_c; eps: bound of the unmodelled part of a
  double fc = 0;
  double k_max = 0;    // bound of |K|: the calibration's error vector at the peak
  double k1_max = 0;   // bound of |K1| per MHz: that vector turning at the fixture's delay
  std::array<bool, kParams> frozen{};   // parameters held at their start value
  double source_match = 0;               // |E_S| bound
  double tau_s = 0;                      // how fast the left-out terms can turn against the unit, s
};

// |K| <= k_max and |K1| <= k1_max as one-sided barrier residuals (zero inside the bounds).
constexpr int kBarriers = 2;
constexpr double kBarrierScale = 0.02;

DipShape shape_of(DipModel m, const Window& w, const Vec& p) {
  return DipShape{m, w.fc + p[5] * 1e6, std::exp(p[6]), std::exp(p[7])};
}

cd rotation(const Vec& p, double x_mhz) { return std::polar(1.0, -2 * std::numbers::pi * p[4] * 1e-3 * x_mhz); }

// Residuals r_i = (|Γ_m| − a_i)/σ_i, and the Jacobian ∂r_i/∂p_j when jac is given.
double residuals(DipModel m, const Window& w, const Vec& p, std::vector<double>& r, std::vector<Vec>* jac) {
  const std::size_t n = w.f.size();
  r.assign(n + kBarriers, 0.0);
  if (jac) jac->assign(n + kBarriers, Vec{});
  const DipShape s = shape_of(m, w, p);
  std::array<DipShape, 3> ds{};
  std::array<double, 3> h{1e-4, 1e-6, 1e-6};
  if (jac) {
    for (int k = 0; k < 3; ++k) {
      Vec q = p;
      q[5 + k] += h[k];
      ds[k] = shape_of(m, w, q);
    }
  }
  double chi2 = 0;
  for (std::size_t i = 0; i < n; ++i) {
    const cd u = dip_gamma(s, w.f[i]);
    const cd rot = std::conj(rotation(p, w.x[i]));
    const cd kk(p[0], p[1]);
    const cd mm = kk * rot + cd(p[2], p[3]) * w.x[i] + u;
    const double am = std::max(std::abs(mm), 1e-12);
    r[i] = (am - w.a[i]) / w.sigma[i];
    chi2 += r[i] * r[i];
    if (!jac) continue;
    Vec& row = (*jac)[i];
    const cd c = std::conj(mm) / (am * w.sigma[i]);
    auto d = [&](const cd& dm) { return (c * dm).real(); };
    row[0] = d(rot);
    row[1] = d(cd(0, 1) * rot);
    row[2] = d(w.x[i]);
    row[3] = d(cd(0, w.x[i]));
    row[4] = d(cd(0, 2 * std::numbers::pi * 1e-3 * w.x[i]) * rot * kk);
    for (int k = 0; k < 3; ++k) row[5 + k] = d((dip_gamma(ds[k], w.f[i]) - u) / h[k]);
    for (int j = 0; j < kParams; ++j) {
      if (w.frozen[j]) row[j] = 0;
    }
  }
  for (int b = 0; b < kBarriers; ++b) {
    const double re = p[2 * b], im = p[2 * b + 1];
    const double mag = std::hypot(re, im), lim = b == 0 ? w.k_max : w.k1_max;
    const double sc = kBarrierScale * lim;
    if (mag <= lim || !(sc > 0)) continue;
    r[n + b] = (mag - lim) / sc;
    chi2 += r[n + b] * r[n + b];
    if (jac) {
      (*jac)[n + b][2 * b] = re / (mag * sc);
      (*jac)[n + b][2 * b + 1] = im / (mag * sc);
    }
  }
  return chi2;
}

// Solves (A) z = b by Cholesky; false when A is not positive definite.
bool cholesky_solve(Mat a, Vec b, Vec& z) {
  for (int j = 0; j < kParams; ++j) {
    double s = a[j][j];
    for (int k = 0; k < j; ++k) s -= a[j][k] * a[j][k];
    if (!(s > 0)) return false;
    a[j][j] = std::sqrt(s);
    for (int i = j + 1; i < kParams; ++i) {
      double t = a[i][j];
      for (int k = 0; k < j; ++k) t -= a[i][k] * a[j][k];
      a[i][j] = t / a[j][j];
    }
  }
  for (int i = 0; i < kParams; ++i) {
    double t = b[i];
    for (int k = 0; k < i; ++k) t -= a[i][k] * b[k];
    b[i] = t / a[i][i];
  }
  for (int i = kParams - 1; i >= 0; --i) {
    double t = b[i];
    for (int k = i + 1; k < kParams; ++k) t -= a[k][i] * b[k];
    b[i] = t / a[i][i];
  }
  z = b;
  return true;
}

Mat normal_matrix(const std::vector<Vec>& jac) {
  Mat a{};
  for (const Vec& row : jac) {
    for (int i = 0; i < kParams; ++i) {
      if (row[i] == 0) continue;
      for (int j = 0; j <= i; ++j) a[i][j] += row[i] * row[j];
    }
  }
  for (int i = 0; i < kParams; ++i) {
    for (int j = i + 1; j < kParams; ++j) a[i][j] = a[j][i];
    if (a[i][i] == 0) a[i][i] = 1;   // a frozen parameter: no data, no gradient, no variance
  }
  return a;
}

// Levenberg–Marquardt from p; returns whether it converged.
bool levenberg_marquardt(DipModel m, const Window& w, Vec& p, double& chi2, int max_iter) {
  std::vector<double> r, r_try;
  std::vector<Vec> jac;
  chi2 = residuals(m, w, p, r, &jac);
  double lambda = 1e-3;
  for (int it = 0; it < max_iter; ++it) {
    const Mat a = normal_matrix(jac);
    Vec g{};
    for (std::size_t i = 0; i < r.size(); ++i) {
      for (int j = 0; j < kParams; ++j) g[j] -= jac[i][j] * r[i];
    }
    bool improved = false;
    for (int tries = 0; tries < 12 && !improved; ++tries) {
      Mat damped = a;
      for (int j = 0; j < kParams; ++j) damped[j][j] += lambda * std::max(a[j][j], 1e-12) + (a[j][j] == 0 ? 1 : 0);
      Vec step{};
      if (!cholesky_solve(damped, g, step)) {
        lambda *= 10;
        continue;
      }
      Vec q = p;
      for (int j = 0; j < kParams; ++j) q[j] += step[j];
      const double c2 = residuals(m, w, q, r_try, nullptr);
      if (std::isfinite(c2) && c2 < chi2) {
        const double gain = chi2 - c2;
        p = q;
        const bool small = gain < 1e-7 * chi2 + 1e-10;
        chi2 = residuals(m, w, p, r, &jac);
        lambda = std::max(lambda / 3, 1e-9);
        improved = true;
        if (small) return true;
      } else {
        lambda *= 4;
      }
    }
    if (!improved) return true;  // no step lowers chi2: at a minimum (within the damping tried)
  }
  return false;
}

// For a fixed shape, the error vector K by linear least squares on a² ≈ |K|² + |Γ_u|² + 2Re(K̄Γ_u)
// (|K|² a free constant), weighted by 1/(2aσ)². Returns the weighted sum of squares.
double linear_k(DipModel m, const Window& w, Vec& p) {
  const DipShape s = shape_of(m, w, p);
  double a[3][4] = {};
  for (std::size_t i = 0; i < w.f.size(); ++i) {
    const cd u = dip_gamma(s, w.f[i]);
    const double wt = 1 / std::pow(2 * w.a[i] * w.sigma[i] + 1e-9, 2);
    const double row[3] = {2 * u.real(), 2 * u.imag(), 1};
    const double y = w.a[i] * w.a[i] - std::norm(u);
    for (int r = 0; r < 3; ++r) {
      for (int c = 0; c < 3; ++c) a[r][c] += wt * row[r] * row[c];
      a[r][3] += wt * row[r] * y;
    }
  }
  for (int c = 0; c < 3; ++c) {
    int piv = c;
    for (int r = c + 1; r < 3; ++r) {
      if (std::fabs(a[r][c]) > std::fabs(a[piv][c])) piv = r;
    }
    if (std::fabs(a[piv][c]) < 1e-300) return std::numeric_limits<double>::infinity();
    for (int k = 0; k < 4; ++k) std::swap(a[c][k], a[piv][k]);
    for (int r = 0; r < 3; ++r) {
      if (r == c) continue;
      const double f = a[r][c] / a[c][c];
      for (int k = 0; k < 4; ++k) a[r][k] -= f * a[c][k];
    }
  }
  p[0] = a[0][3] / a[0][0];
  p[1] = a[1][3] / a[1][1];
  p[2] = p[3] = 0;
  const double mag = std::hypot(p[0], p[1]);
  if (mag > w.k_max && mag > 0) {
    p[0] *= w.k_max / mag;
    p[1] *= w.k_max / mag;
  }
  std::vector<double> r;
  return residuals(m, w, p, r, nullptr);
}

// Start of the series-RLC fit: a grid over the resonance and the loaded Q (radius ½, a matched
// unit), K by linear least squares at each node; the best node.
Vec rlc_start(const Window& w, double off) {
  const double half_span = 0.5 * (w.f.back() - w.f.front());
  // Matched series resonance: |Γ| = |sin φ| = ½ where b·2Δf/f0 = tan 30°.
  const double q0 = 0.2887 * w.fc / std::max(half_span, 1.0);
  Vec best{};
  double best_c2 = std::numeric_limits<double>::infinity();
  {
    for (double qm : {0.6, 1.0, 1.6}) {
      for (double rho : {0.35, 0.5, 0.7}) {
        Vec p{};
        p[5] = off * half_span / 1e6;
        p[6] = std::log(q0 * qm);
        p[7] = std::log(rho);
        const double c2 = linear_k(DipModel::series_rlc, w, p);
        if (c2 < best_c2) {
          best_c2 = c2;
          best = p;
        }
      }
    }
  }
  return best;
}

// The monopole started from a fitted series RLC: same resonance, same reactance slope
// (dX/df = 2X0/f0 = Z_a·π/(2f_q)), same resistance.
Vec monopole_start(const Window& w, const Vec& rlc) {
  const DipShape s = shape_of(DipModel::series_rlc, w, rlc);
  const double r_ohm = 50 * (1 / s.c - 1);
  const double x0 = s.b * 50 / s.c;
  Vec p = rlc;
  p[6] = std::log(std::max(4 * x0 / std::numbers::pi, 1.0));
  p[7] = std::log(std::max(r_ohm, 0.5));
  linear_k(DipModel::line_monopole, w, p);
  p[2] = rlc[2];
  p[3] = rlc[3];
  p[4] = rlc[4];
  return p;
}

// Width of the region around f_res where the unit's own |Γ| <= g_thr (bisection each side
// within `reach`); nullopt when either side does not cross.
std::optional<double> unit_bandwidth(const DipShape& s, double f_res, double g_thr, double reach) {
  auto edge = [&](double dir) -> std::optional<double> {
    double in = f_res, out = f_res + dir * reach;
    if (std::abs(dip_gamma(s, out)) <= g_thr) return std::nullopt;
    for (int i = 0; i < 60 && std::fabs(out - in) > 0.5; ++i) {
      const double mid = 0.5 * (in + out);
      (std::abs(dip_gamma(s, mid)) <= g_thr ? in : out) = mid;
    }
    return 0.5 * (in + out);
  };
  if (std::abs(dip_gamma(s, f_res)) > g_thr) return std::nullopt;
  auto lo = edge(-1), hi = edge(1);
  if (!lo || !hi) return std::nullopt;
  return *hi - *lo;
}

struct Quantities {
  double resonance_hz = 0, depth_db = 0;
  std::optional<double> bandwidth_hz;
};

Quantities quantities(DipModel m, const Window& w, const Vec& p, double g_thr) {
  const DipShape s = shape_of(m, w, p);
  Quantities q;
  q.resonance_hz = dip_resonance_hz(s, w.f.front(), w.f.back());
  q.depth_db = -20 * std::log10(std::max(std::abs(dip_gamma(s, q.resonance_hz)), 1e-9));
  q.bandwidth_hz = unit_bandwidth(s, q.resonance_hz, g_thr, 4 * (w.f.back() - w.f.front()));
  return q;
}

// Statistical σ and bound of a derived quantity with gradient `grad` (over the parameters):
// σ² = gᵀA⁻¹g·max(1, χ²/ν); bound = Σ_i |J_i·A⁻¹g|·ε_i/σ_i (a data change δa moves the
// least-squares parameters by A⁻¹Jᵀ(δa/σ) to first order).
// Per point at the fitted parameters: n = conj(Γ̂)/|Γ̂| (a change δΓ of the reflection moves the
// amplitude by Re(n·δΓ)) and the unit's own Γ_u.
struct PointState {
  std::vector<cd> n, unit;
  double k_fit = 0, tau_fit_s = 0;
};

PointState point_state(DipModel m, const Window& w, const Vec& p) {
  PointState st;
  const DipShape s = shape_of(m, w, p);
  for (std::size_t i = 0; i < w.f.size(); ++i) {
    const cd u = dip_gamma(s, w.f[i]);
    const cd mm = cd(p[0], p[1]) * std::conj(rotation(p, w.x[i])) + cd(p[2], p[3]) * w.x[i] + u;
    st.n.push_back(std::conj(mm) / std::max(std::abs(mm), 1e-12));
    st.unit.push_back(u);
  }
  st.k_fit = std::hypot(p[0], p[1]);
  st.tau_fit_s = std::fabs(p[4]) * 1e-9;
  return st;
}

// Statistical σ and bound of a derived quantity with gradient `grad` (over the parameters).
// σ² = gᵀA⁻¹g·max(1, χ²/ν). A data change δa moves the least-squares parameters by
// A⁻¹Jᵀ(δa/σ) to first order, so the quantity by Σ h_i·δa_i with h_i = (J_i·A⁻¹g)/σ_i, and
// δa_i = Re(n_i·δΓ_i) for a change δΓ_i of the reflection. The bound takes each left-out term
// at its worst phase (MEASUREMENT.md, "Fitting the unit"):
//   source match   δΓ = s0·Γ_u² + s1·x·Γ_u² + rest,  |s0| <= ρ_s, |s1| <= 2πτρ_s
//   error vector   δΓ = c1·x + rest,                  |c1| <= 2πτE (beyond the fitted turn)
// each linear term bounded by |coefficient|·|Σ h_i n_i (its shape)_i|, and the rests (second
// order in x, and in ρ_s) by Σ|h_i|·rest_i.
void propagate(const Mat& a, const std::vector<Vec>& jac, const Window& w, const PointState& st, const Vec& grad,
               double scale, double& sigma, double& bound) {
  Vec v{};
  sigma = bound = std::numeric_limits<double>::infinity();
  if (!cholesky_solve(a, grad, v)) return;
  double var = 0;
  for (int j = 0; j < kParams; ++j) var += grad[j] * v[j];
  sigma = std::sqrt(std::max(0.0, var) * scale);
  cd b_s0 = 0, b_s1 = 0, b_c1 = 0;
  double rest = 0;
  const double two_pi_tau = 2 * std::numbers::pi * w.tau_s;
  for (std::size_t i = 0; i < w.f.size(); ++i) {
    double h = 0;
    for (int j = 0; j < kParams; ++j) h += jac[i][j] * v[j];
    h /= w.sigma[i];
    const cd u2 = st.unit[i] * st.unit[i];
    b_s0 += h * st.n[i] * u2;
    b_s1 += h * st.n[i] * u2 * w.x[i] * 1e6;
    b_c1 += h * st.n[i] * w.x[i] * 1e6;
    rest += std::fabs(h) * w.eps[i];
  }
  const double rho = w.source_match, e = w.k_max;
  bound = rho * std::abs(b_s0) + two_pi_tau * rho * std::abs(b_s1) + two_pi_tau * e * std::abs(b_c1) + rest;
}

DipModelFit fit_model(DipModel m, const Window& w, Vec& p, double g_thr, const DipFitSettings& set) {
  DipModelFit out;
  out.model = m;
  double chi2 = 0;
  out.converged = levenberg_marquardt(m, w, p, chi2, set.max_iterations);
  out.shape = shape_of(m, w, p);
  out.chi2 = chi2;
  out.dof = static_cast<int>(w.f.size()) - kParams;
  out.chi2_limit = chi2_upper_quantile(out.dof, set.gof_quantile_z);
  const Quantities q = quantities(m, w, p, g_thr);
  out.resonance_hz = q.resonance_hz;
  out.depth_db = q.depth_db;
  out.bandwidth_hz = q.bandwidth_hz;

  std::vector<double> r;
  std::vector<Vec> jac;
  residuals(m, w, p, r, &jac);
  const Mat a = normal_matrix(jac);
  const double scale = std::max(1.0, chi2 / std::max(out.dof, 1));
  // Gradients of the derived quantities by forward differences in the shape parameters.
  Vec g_res{}, g_depth{}, g_bw{};
  const std::array<double, 3> h{1e-3, 1e-3, 1e-3};
  for (int k = 0; k < 3; ++k) {
    Vec pk = p;
    pk[5 + k] += h[k];
    const Quantities qk = quantities(m, w, pk, g_thr);
    g_res[5 + k] = (qk.resonance_hz - q.resonance_hz) / h[k];
    g_depth[5 + k] = (qk.depth_db - q.depth_db) / h[k];
    if (q.bandwidth_hz && qk.bandwidth_hz) g_bw[5 + k] = (*qk.bandwidth_hz - *q.bandwidth_hz) / h[k];
  }
  const PointState st = point_state(m, w, p);
  propagate(a, jac, w, st, g_res, scale, out.resonance_sigma_hz, out.resonance_bound_hz);
  propagate(a, jac, w, st, g_depth, scale, out.depth_sigma_db, out.depth_bound_db);
  if (q.bandwidth_hz) propagate(a, jac, w, st, g_bw, scale, out.bandwidth_sigma_hz, out.bandwidth_bound_hz);

  // A fitted error vector well beyond the calibration's bound: the model does not describe this
  // trace (a few per cent over is noise pressing against the barrier).
  const bool at_bound = std::hypot(p[0], p[1]) > w.k_max * 1.1 || std::hypot(p[2], p[3]) > w.k1_max * 1.1;
  for (int b = 0; b < kBarriers; ++b) chi2 -= r[w.f.size() + b] * r[w.f.size() + b];
  out.chi2 = chi2;
  if (!out.converged) out.problem = "the fit did not converge";
  else if (at_bound) out.problem = "the fit needs a larger error vector than the calibration allows";
  else if (std::fabs(p[4]) * 1e-9 > 1.5 * w.tau_s + 0.5e-9) out.problem = "the fit needs the error vector to turn faster than the fixture allows";
  else if (!(chi2 <= out.chi2_limit))
    out.problem = fmt::format("residuals exceed the measured noise (chi-square {:.0f} over {} degrees of freedom, limit {:.0f})",
                              chi2, out.dof, out.chi2_limit);
  else if (m == DipModel::series_rlc && !(out.shape.c > 0 && out.shape.c <= 1.05 && out.shape.b > 0))
    out.problem = "unphysical series-RLC parameters";
  else if (m == DipModel::line_monopole && !(out.shape.b > 5 && out.shape.b < 5000 && out.shape.c > 0))
    out.problem = "unphysical monopole parameters";
  else if (q.resonance_hz < w.f.front() || q.resonance_hz > w.f.back())
    out.problem = "the fitted resonance lies outside the fitted points";
  else if (!std::isfinite(out.resonance_sigma_hz) || !std::isfinite(out.resonance_bound_hz))
    out.problem = "the fit does not determine the resonance";
  out.passes = out.problem.empty();
  return out;
}

}  // namespace

double chi2_upper_quantile(int n, double z) {
  if (n <= 0) return 0;
  const double c = 2.0 / (9.0 * n);
  return n * std::pow(1 - c + z * std::sqrt(c), 3);
}

DipFit fit_dip(const std::vector<PointResult>& points, std::size_t peak, const DipFitContext& ctx,
               double bandwidth_threshold_db, int erratic_jumps, const DipFitSettings& set) {
  DipFit fit;
  const std::size_t n = points.size();
  auto refuse = [&](std::string why) {
    fit.refused = std::move(why);
    return fit;
  };
  if (peak >= n || ctx.sigma_db.size() != n || ctx.error_vector.size() != n) return refuse("no context for the fit");
  if (erratic_jumps >= 3) return refuse("the trace is erratic (an intermittent connection?)");
  const double peak_rl = points[peak].return_loss_db;
  if (!(peak_rl >= set.min_peak_rl_db)) return refuse(fmt::format("no dip of {:.0f} dB to fit", set.min_peak_rl_db));
  // The window: the contiguous points at or above the first level (window_min_rl_db, then 2 dB
  // steps up to 4 dB under the peak) whose region ends inside the sweep on both sides.
  std::size_t lo = peak, hi = peak;
  bool inside = false;
  for (double level = set.window_min_rl_db; level <= peak_rl - 4 && !inside; level += 2) {
    lo = hi = peak;
    while (lo > 0 && points[lo - 1].return_loss_db >= level) --lo;
    while (hi + 1 < n && points[hi + 1].return_loss_db >= level) ++hi;
    inside = lo > 0 && hi + 1 < n;
  }
  fit.points = static_cast<int>(hi - lo + 1);
  if (!inside) return refuse("the dip runs off the end of the sweep");
  if (fit.points < set.min_points) return refuse(fmt::format("only {} points in the dip", fit.points));
  // Another point outside the window that could be the true maximum: a second dip.
  const double level = points[peak].return_loss_worst_db;
  for (std::size_t i = 0; i < n; ++i) {
    if ((i < lo || i > hi) && points[i].return_loss_best_db >= level) {
      return refuse("another dip elsewhere in the sweep could be the resonance");
    }
  }
  Window w;
  w.fc = points[peak].frequency_hz;
  // The error vector turns against the unit's reflection at up to the fixture's delay plus the
  // unit's own feed (both ways).
  const double tau = ctx.error_delay_s + 2 * set.unit_feed_delay_s;
  // The error vector's slope (K1) and turn (τ) are bounded, not fitted: either, free, trades
  // against the resonance to fourth order in the dip's phase and leaves it undetermined
  // (MEASUREMENT.md, "Fitting the unit").
  w.frozen[2] = w.frozen[3] = w.frozen[4] = true;
  for (std::size_t i = lo; i <= hi; ++i) w.k_max = std::max(w.k_max, ctx.error_vector[i]);
  w.k1_max = 2 * std::numbers::pi * tau * 1e6 * w.k_max;
  // At most max_points, evenly strided, keeping the peak (the fit's cost grows with them).
  const std::size_t stride = (hi - lo) / static_cast<std::size_t>(std::max(set.max_points, 2)) + 1;
  for (std::size_t i = lo + (peak - lo) % stride; i <= hi; i += stride) {
    const double a = std::pow(10.0, -points[i].return_loss_db / 20);
    const double dx = points[i].frequency_hz - w.fc;
    w.f.push_back(points[i].frequency_hz);
    w.x.push_back(dx / 1e6);
    w.a.push_back(a);
    w.sigma.push_back(std::max(a * ctx.sigma_db[i] / kDbPerNeper, 1e-7));
    // What the linear terms of propagate() leave out, bounded per point: the error vector's
    // second order (½E(2πτx)²), the source match's variation beyond its slope (½ρ_s(2πτx)²|Γ|²)
    // and its higher orders (|Γ'| − |Γ| − ρ_s|Γ|² <= ρ_s²|Γ|³/(1 − ρ_s|Γ|)).
    const double e = ctx.error_vector[i];
    const double turn = 2 * std::numbers::pi * tau * std::fabs(dx);
    const double g = std::min(a + e, 1.0);
    const double sm = ctx.source_match;
    w.eps.push_back(0.5 * e * turn * turn + 0.5 * sm * turn * turn * g * g + sm * sm * g * g * g / (1 - sm * g));
  }
  w.source_match = ctx.source_match;
  w.tau_s = tau;
  const double g_thr = std::pow(10.0, -bandwidth_threshold_db / 20);
  // Several starts across the window: a trace that two resonances fit equally well must not be
  // placed at one of them (every passing solution joins the interval below).
  for (double off : {-0.25, 0.0, 0.25}) {
    Vec rlc_p = rlc_start(w, off);
    fit.models.push_back(fit_model(DipModel::series_rlc, w, rlc_p, g_thr, set));
    Vec mono_p = monopole_start(w, rlc_p);
    fit.models.push_back(fit_model(DipModel::line_monopole, w, mono_p, g_thr, set));
  }

  const double k = ctx.coverage_factor;
  double best_ratio = std::numeric_limits<double>::infinity();
  bool any = false;
  for (std::size_t i = 0; i < fit.models.size(); ++i) {
    const DipModelFit& m = fit.models[i];
    if (!m.passes) continue;
    const double hw = k * m.resonance_sigma_hz + m.resonance_bound_hz;
    const double dw = k * m.depth_sigma_db + m.depth_bound_db;
    if (!any) {
      fit.resonance_low_hz = m.resonance_hz - hw;
      fit.resonance_high_hz = m.resonance_hz + hw;
      fit.depth_low_db = m.depth_db - dw;
      fit.depth_high_db = m.depth_db + dw;
    } else {
      fit.resonance_low_hz = std::min(fit.resonance_low_hz, m.resonance_hz - hw);
      fit.resonance_high_hz = std::max(fit.resonance_high_hz, m.resonance_hz + hw);
      fit.depth_low_db = std::min(fit.depth_low_db, m.depth_db - dw);
      fit.depth_high_db = std::max(fit.depth_high_db, m.depth_db + dw);
    }
    any = true;
    const double ratio = m.chi2 / std::max(m.dof, 1);
    if (ratio < best_ratio) {
      best_ratio = ratio;
      fit.best = static_cast<int>(i);
    }
  }
  if (!any) {
    // The best attempt of each model says why.
    std::string why = "no unit model fits:";
    for (DipModel model : {DipModel::series_rlc, DipModel::line_monopole}) {
      const DipModelFit* b = nullptr;
      for (const DipModelFit& m : fit.models) {
        if (m.model == model && (!b || m.chi2 < b->chi2)) b = &m;
      }
      if (b) why += fmt::format(" {}: {};", to_string(b->model), b->problem);
    }
    why.pop_back();
    return refuse(why);
  }
  // Bandwidth: the union over the passing models that have one (all must, or none is given).
  bool bw_all = true;
  for (const DipModelFit& m : fit.models) {
    if (!m.passes) continue;
    if (!m.bandwidth_hz) {
      bw_all = false;
      continue;
    }
    const double bw = k * m.bandwidth_sigma_hz + m.bandwidth_bound_hz;
    fit.bandwidth_low_hz = fit.bandwidth_low_hz ? std::min(*fit.bandwidth_low_hz, *m.bandwidth_hz - bw) : *m.bandwidth_hz - bw;
    fit.bandwidth_high_hz = fit.bandwidth_high_hz ? std::max(*fit.bandwidth_high_hz, *m.bandwidth_hz + bw) : *m.bandwidth_hz + bw;
  }
  const DipModelFit& b = fit.models[fit.best];
  fit.resonance_hz = b.resonance_hz;
  fit.depth_db = b.depth_db;
  if (bw_all && b.bandwidth_hz) {
    fit.bandwidth_hz = b.bandwidth_hz;
  } else {
    fit.bandwidth_low_hz.reset();
    fit.bandwidth_high_hz.reset();
  }
  fit.used = true;
  return fit;
}

}  // namespace echoline::core
