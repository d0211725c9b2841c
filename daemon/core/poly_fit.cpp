// Polynomial least squares for the resonance bounds (poly_fit.hpp).
#include "daemon/core/poly_fit.hpp"

#include <algorithm>
#include <cmath>
#include <utility>

namespace echoline::core {

bool least_squares(const std::vector<double>& x, const std::vector<double>& y, int m, double* coef,
                   double (*inverse)[4]) {
  double a[4][9] = {};
  for (std::size_t i = 0; i < x.size(); ++i) {
    double p[4] = {1, x[i], x[i] * x[i], x[i] * x[i] * x[i]};
    for (int r = 0; r < m; ++r) {
      for (int c = 0; c < m; ++c) a[r][c] += p[r] * p[c];
      a[r][m] += p[r] * y[i];
    }
  }
  // Augment with the identity for the inverse: columns m+1 .. 2m.
  for (int r = 0; r < m; ++r) a[r][m + 1 + r] = 1;
  const int cols = 2 * m + 1;
  for (int c = 0; c < m; ++c) {
    int piv = c;
    for (int r = c + 1; r < m; ++r) {
      if (std::fabs(a[r][c]) > std::fabs(a[piv][c])) piv = r;
    }
    if (std::fabs(a[piv][c]) < 1e-300) return false;
    if (piv != c) {
      for (int k = 0; k < cols; ++k) std::swap(a[c][k], a[piv][k]);
    }
    for (int r = 0; r < m; ++r) {
      if (r == c) continue;
      const double f = a[r][c] / a[c][c];
      for (int k = 0; k < cols; ++k) a[r][k] -= f * a[c][k];
    }
  }
  for (int r = 0; r < m; ++r) {
    coef[r] = a[r][m] / a[r][r];
    if (inverse) {
      for (int k = 0; k < m; ++k) inverse[r][k] = a[r][m + 1 + k] / a[r][r];
    }
  }
  return true;
}

double cubic_minimum_near(const std::vector<double>& x, const std::vector<double>& y, double xv) {
  double cu[4];
  if (x.size() < 5 || !least_squares(x, y, 4, cu)) return xv;
  // Roots of cu1 + 2cu2·x + 3cu3·x² = 0; the one with positive curvature.
  const double A = 3 * cu[3], B = 2 * cu[2], C = cu[1];
  if (std::fabs(A) < 1e-300) return B > 0 ? -C / B : 1e300;
  const double disc = B * B - 4 * A * C;
  if (disc < 0) return 1e300;
  // Stable form (no cancellation when the cubic term is small): q = −(B ± √disc)/2.
  const double qq = -0.5 * (B + std::copysign(std::sqrt(disc), B));
  const double r1 = qq / A, r2 = qq != 0 ? C / qq : r1;
  const bool min1 = B + 2 * A * r1 > 0, min2 = B + 2 * A * r2 > 0;
  return min1 ? r1 : (min2 ? r2 : 1e300);
}

double fit_variance(const std::vector<double>& x, const std::vector<double>& y, const double* q, double mean_var) {
  const std::size_t m = x.size();
  double rss = 0;
  for (std::size_t i = 0; i < m; ++i) {
    const double r = y[i] - (q[0] + q[1] * x[i] + q[2] * x[i] * x[i]);
    rss += r * r;
  }
  return std::max(m > 3 ? rss / static_cast<double>(m - 3) : rss, mean_var);
}

double vertex_sigma(const std::vector<double>& x, const std::vector<double>& y, const double* q,
                    const double (*inv)[4], double mean_var) {
  const double s2 = fit_variance(x, y, q, mean_var);
  const double b = q[1], c = q[2];
  const double gb = -1 / (2 * c), gc = b / (2 * c * c);  // ∂xv/∂b, ∂xv/∂c
  const double var_xv = s2 * (gb * gb * inv[1][1] + 2 * gb * gc * inv[1][2] + gc * gc * inv[2][2]);
  return std::sqrt(std::max(0.0, var_xv));
}

FitKernels quadratic_fit_kernels(const std::vector<double>& x, const double (*inv)[4], double x_eval) {
  const std::size_t n = x.size();
  FitKernels k;
  if (n < 2) return k;
  // The fit's outputs as weights on the samples: slope at x_eval = Σα_i·y_i, x² coefficient
  // = Σβ_i·y_i, from (XᵀX)⁻¹Xᵀ.
  std::vector<double> alpha(n), beta(n);
  for (std::size_t i = 0; i < n; ++i) {
    const double p[3] = {1, x[i], x[i] * x[i]};
    double a = 0, b = 0;
    for (int c = 0; c < 3; ++c) {
      a += (inv[1][c] + 2 * x_eval * inv[2][c]) * p[c];
      b += inv[2][c] * p[c];
    }
    alpha[i] = a;
    beta[i] = b;
  }
  // K₁(t) = Σ_{x_i > t} α_i is constant on each interval; K₂(t) = Σ_{x_i > t} β_i·(x_i − t) is
  // straight there, so ∫|K₂| is a trapezoid, or two triangles where it crosses zero.
  k.slope.assign(n - 1, 0);
  k.curvature.assign(n - 1, 0);
  double tail_a = 0, tail_b = 0, tail_bx = 0;   // Σ_{i>j} α_i, β_i, β_i·x_i
  double k2_min = 0, k2_max = 0;
  for (std::size_t j = n - 1; j-- > 0;) {
    tail_a += alpha[j + 1];
    tail_b += beta[j + 1];
    tail_bx += beta[j + 1] * x[j + 1];
    const double d = x[j + 1] - x[j];
    k.slope[j] = std::fabs(tail_a) * d;
    const double ka = tail_bx - tail_b * x[j], kb = tail_bx - tail_b * x[j + 1];
    k2_min = std::min({k2_min, ka, kb});
    k2_max = std::max({k2_max, ka, kb});
    k.curvature[j] = (ka >= 0) == (kb >= 0) ? 0.5 * d * (std::fabs(ka) + std::fabs(kb))
                                            : 0.5 * d * (ka * ka + kb * kb) / (std::fabs(ka) + std::fabs(kb));
  }
  k.curvature_one_sign = k2_min >= -1e-9 * k2_max;   // rounding aside
  return k;
}

}  // namespace echoline::core
