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

double vertex_sigma(const std::vector<double>& x, const std::vector<double>& y, const double* q,
                    const double (*inv)[4], double mean_var) {
  const std::size_t m = x.size();
  double rss = 0;
  for (std::size_t i = 0; i < m; ++i) {
    const double r = y[i] - (q[0] + q[1] * x[i] + q[2] * x[i] * x[i]);
    rss += r * r;
  }
  const double s2 = std::max(m > 3 ? rss / static_cast<double>(m - 3) : rss, mean_var);
  const double b = q[1], c = q[2];
  const double gb = -1 / (2 * c), gc = b / (2 * c * c);  // ∂xv/∂b, ∂xv/∂c
  const double var_xv = s2 * (gb * gb * inv[1][1] + 2 * gb * gc * inv[1][2] + gc * gc * inv[2][2]);
  return std::sqrt(std::max(0.0, var_xv));
}

}  // namespace echoline::core
