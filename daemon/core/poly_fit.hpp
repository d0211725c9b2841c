// Small polynomial least squares for the resonance bounds (analysis.cpp, pair_shift_bound.cpp):
// the quadratic or cubic through a dip's points, the cubic's minimum near a vertex, and the
// vertex's standard deviation. Pure; thread-safe.
#pragma once

#include <vector>

namespace echoline::core {

// Least squares of y on 1, x, …, x^(m−1) (m = 3 or 4) by the normal equations, Gaussian
// elimination with partial pivoting. Keep x small (MHz from the peak) for conditioning.
// Returns false when singular. `inverse` (optional) gets (XᵀX)⁻¹ for the covariance.
bool least_squares(const std::vector<double>& x, const std::vector<double>& y, int m, double* coef,
                   double (*inverse)[4] = nullptr);

// The minimum of the cubic fitted to (x, y) that lies nearest the quadratic's vertex xv (a root of
// its derivative with positive curvature); a huge value when the cubic has none, and xv when
// there are fewer than 5 points or the fit is singular.
double cubic_minimum_near(const std::vector<double>& x, const std::vector<double>& y, double xv);

// The variance of one sample about the quadratic a + b·x + c·x² fitted to (x, y): the residual
// scatter (over m − 3 degrees of freedom) or the noise's mean variance `mean_var`, the larger.
double fit_variance(const std::vector<double>& x, const std::vector<double>& y, const double* q, double mean_var);

// Standard deviation of the vertex −b/(2c) of the quadratic a + b·x + c·x² fitted to (x, y), from
// the residual scatter or the noise σ_y, whichever is larger (per-point σ given as their mean
// variance `mean_var`). `inv` from least_squares.
double vertex_sigma(const std::vector<double>& x, const std::vector<double>& y, const double* q,
                    const double (*inv)[4], double mean_var);

// How the least-squares quadratic through (x, y) (x ascending) answers to a smooth function N
// added to y, by the Peano kernels of two of its outputs: its slope at x_eval is ∫K₁·N′ and its
// quadratic coefficient ∫K₂·N″ (both annihilate constants and straight lines). Per interval
// [x_j, x_{j+1}]: slope[j] = ∫|K₁| and curvature[j] = ∫|K₂| over it, so
// |slope of N's fit at x_eval| ≤ Σ slope[j]·max|N′| there and |its x² coefficient| ≤
// Σ curvature[j]·max|N″| there. The kernels change sign on lopsided windows: there Σ slope[j]
// exceeds 1, and max|N′| alone does not bound the fitted slope. `inv` from least_squares (m = 3).
struct FitKernels {
  std::vector<double> slope;
  std::vector<double> curvature;
  bool curvature_one_sign = true;   // K₂ ≥ 0 throughout: the fitted x² coefficient is a mean of N″/2
};
FitKernels quadratic_fit_kernels(const std::vector<double>& x, const double (*inv)[4], double x_eval);

}  // namespace echoline::core
