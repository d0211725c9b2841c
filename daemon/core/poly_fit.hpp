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

// Standard deviation of the vertex −b/(2c) of the quadratic a + b·x + c·x² fitted to (x, y), from
// the residual scatter or the noise σ_y, whichever is larger (per-point σ given as their mean
// variance `mean_var`). `inv` from least_squares.
double vertex_sigma(const std::vector<double>& x, const std::vector<double>& y, const double* q,
                    const double (*inv)[4], double mean_var);

}  // namespace echoline::core
