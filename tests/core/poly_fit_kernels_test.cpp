// The least-squares quadratic's Peano kernels (poly_fit.hpp), checked against the fit itself. A
// linear functional of the samples that annihilates constants and straight lines equals
// ∫K₁·N′ (and, annihilating quadratics' lower terms, ∫K₂·N″): the Peano kernel theorem
// (numerical analysis texts, e.g. Davis, Interpolation and Approximation; from memory). So a
// ramp that rises by one over a single interval, fitted, must show that interval's kernel
// mass, and a function whose slope follows the kernel's sign reaches the sum.
#include <algorithm>
#include <cmath>
#include <tuple>
#include <vector>

#include <gtest/gtest.h>

#include "daemon/core/poly_fit.hpp"

namespace echoline::core {
namespace {

struct Fit {
  double slope_at, x2;   // the fitted quadratic's slope at x_eval and its x² coefficient
};

Fit fit_of(const std::vector<double>& x, const std::vector<double>& y, double x_eval) {
  double q[4];
  EXPECT_TRUE(least_squares(x, y, 3, q));
  return {q[1] + 2 * q[2] * x_eval, q[2]};
}

FitKernels kernels_of(const std::vector<double>& x, double x_eval) {
  std::vector<double> y(x.size(), 0.0);
  double q[4], inv[4][4];
  EXPECT_TRUE(least_squares(x, y, 3, q, inv));
  return quadratic_fit_kernels(x, inv, x_eval);
}

std::vector<double> grid(int left, int right, double step) {
  std::vector<double> x;
  for (int i = -left; i <= right; ++i) x.push_back(i * step);
  return x;
}

// N rising by the interval's width over [x_j, x_{j+1}] and flat elsewhere (N′ = 1 there only).
std::vector<double> ramp(const std::vector<double>& x, std::size_t j) {
  std::vector<double> y;
  for (double xi : x) y.push_back(std::clamp(xi - x[j], 0.0, x[j + 1] - x[j]));
  return y;
}

// N with N″ = 1 over [x_j, x_{j+1}] only: ½(x − x_j)² there, then straight.
std::vector<double> bend(const std::vector<double>& x, std::size_t j) {
  const double d = x[j + 1] - x[j];
  std::vector<double> y;
  for (double xi : x) {
    const double t = xi - x[j];
    y.push_back(t <= 0 ? 0.0 : (t <= d ? 0.5 * t * t : 0.5 * d * d + d * (t - d)));
  }
  return y;
}

double sum(const std::vector<double>& v) {
  double s = 0;
  for (double e : v) s += e;
  return s;
}

TEST(QuadraticFitKernels, EachIntervalsMassIsWhatTheFitShowsOfIt) {
  for (const auto& [left, right, x_eval] : std::vector<std::tuple<int, int, double>>{
           {5, 5, 0.0}, {3, 10, 0.0}, {2, 20, 0.3}, {10, 30, -0.4}, {2, 3, 0.5}}) {
    const std::vector<double> x = grid(left, right, 0.5);
    const FitKernels k = kernels_of(x, x_eval);
    ASSERT_EQ(k.slope.size(), x.size() - 1);
    for (std::size_t j = 0; j + 1 < x.size(); ++j) {
      // The kernel K₁ is constant on an interval: the ramp's fitted slope is ±its mass exactly.
      EXPECT_NEAR(std::fabs(fit_of(x, ramp(x, j), x_eval).slope_at), k.slope[j], 1e-9)
          << left << "/" << right << " interval " << j;
      // K₂ is straight on an interval: |∫K₂| ≤ ∫|K₂|, equal where it keeps its sign.
      EXPECT_LE(std::fabs(fit_of(x, bend(x, j), x_eval).x2), k.curvature[j] + 1e-12);
    }
  }
}

TEST(QuadraticFitKernels, ASymmetricWindowWeighsTheSlopeAsAMeanALopsidedOneDoesNot) {
  // Symmetric about the evaluation point: ∫K₁ = 1 (the fit reproduces a straight line's slope)
  // and ∫K₂ = ½ (it reproduces x²/2, N″ = 1), with kernels of one sign: the sums are exactly those.
  const FitKernels sym = kernels_of(grid(6, 6, 0.5), 0.0);
  EXPECT_NEAR(sum(sym.slope), 1.0, 1e-9);
  EXPECT_NEAR(sum(sym.curvature), 0.5, 1e-9);
  // Three samples left of the vertex, ten right: K₁ changes sign, so a function whose slope
  // never exceeds 1 can give a fitted slope above 1; the kernels' mass is the true bound, and
  // N′ = sign(K₁) on each interval reaches it.
  const std::vector<double> x = grid(3, 10, 0.5);
  const FitKernels lop = kernels_of(x, 0.0);
  EXPECT_GT(sum(lop.slope), 1.1);
  std::vector<double> y(x.size(), 0.0);
  for (std::size_t j = 0; j + 1 < x.size(); ++j) {
    const std::vector<double> r = ramp(x, j);
    const double sign = fit_of(x, r, 0.0).slope_at >= 0 ? 1.0 : -1.0;
    for (std::size_t i = 0; i < x.size(); ++i) y[i] += sign * r[i];   // |N′| = 1 throughout
  }
  EXPECT_NEAR(fit_of(x, y, 0.0).slope_at, sum(lop.slope), 1e-9);
  EXPECT_NEAR(sum(lop.curvature), 0.5, 1e-9);   // K₂ ≥ 0 here too: the curvature stays a mean
  EXPECT_TRUE(lop.curvature_one_sign);
  EXPECT_TRUE(sym.curvature_one_sign);
}

}  // namespace
}  // namespace echoline::core
