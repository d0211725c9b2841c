// The dip fit: a physical model of the unit (dip_models.hpp) seen through the bench's error
// vector, fitted to the scalar trace around the resonance by least squares. It places the
// resonance, the depth and the bandwidth of the unit's OWN reflection with coverage intervals:
// the fit's statistical part (Jacobian and residuals) plus a derived bound of what the model
// leaves out (the error vector's curvature, source match). A goodness-of-fit test stated in
// advance decides whether the fit may be used. Derivation: MEASUREMENT.md, "Fitting the unit".
// Pure; thread-safe.
#pragma once

#include <optional>
#include <string>
#include <vector>

#include "daemon/core/dip_models.hpp"
#include "daemon/core/run_result.hpp"

namespace echoline::core {

// What the fit needs besides the points, per point and for the bench.
struct DipFitContext {
  std::vector<double> sigma_db;           // σ of one reading (dB), the measured reading noise
  std::vector<double> error_vector;       // bound of the error vector |E_D| + k·u_conn, |Γ| units
  double source_match = 0;                // |E_S| bound, linear
  double error_delay_s = 5e-9;            // how fast the error vector can turn (fixture)
  double coverage_factor = 3;
};

// Settings stated in advance (defaults are the shipped ones; MEASUREMENT.md gives the reasons).
struct DipFitSettings {
  double window_min_rl_db = 6;      // the fit uses the contiguous points at or above this RL
  double min_peak_rl_db = 10;       // a dip shallower than this is not fitted
  int min_points = 12;
  int max_points = 64;              // a wider window is strided down to about this many
  double gof_quantile_z = 3.09;     // χ² test at the upper 99.9 % point (one-sided normal z)
  int max_iterations = 60;
  double unit_feed_delay_s = 0.5e-9;  // allowance for the unit's own feed line, one way (10 cm of PTFE coax)
};

// One model's fit.
struct DipModelFit {
  DipModel model = DipModel::series_rlc;
  DipShape shape;
  bool converged = false;
  double chi2 = 0;
  int dof = 0;
  double chi2_limit = 0;            // the goodness-of-fit threshold for this dof
  bool passes = false;              // converged, physical, and chi2 <= chi2_limit
  std::string problem;              // why it does not pass ("" when it does)
  double resonance_hz = 0;
  double resonance_sigma_hz = 0;    // statistical standard deviation (residual scale at least 1)
  double resonance_bound_hz = 0;    // bound of the model / calibration residuals (bounded)
  double depth_db = 0;              // the unit's own return loss at resonance
  double depth_sigma_db = 0, depth_bound_db = 0;
  std::optional<double> bandwidth_hz;   // where the unit's own RL >= the threshold
  double bandwidth_sigma_hz = 0, bandwidth_bound_hz = 0;
};

struct DipFit {
  bool used = false;                // a model passed: the fitted interval may decide
  std::string refused;              // why not ("" when used)
  int points = 0;                   // points in the fit window
  std::vector<DipModelFit> models;  // every model tried
  int best = -1;                    // index of the passing model with the smallest chi2/dof
  // Union over the passing models of resonance ± (k·σ + bound), and of depth and bandwidth.
  double resonance_hz = 0, resonance_low_hz = 0, resonance_high_hz = 0;
  double depth_db = 0, depth_low_db = 0, depth_high_db = 0;
  std::optional<double> bandwidth_hz, bandwidth_low_hz, bandwidth_high_hz;
};

// Fits both unit models to the trace around `peak` (the sample with the largest measured RL).
// Refused (used = false, `refused` says why) when: the trace is erratic (erratic_jumps >= 3),
// the peak is under min_peak_rl_db, the window is too small or reaches the sweep's end,
// another point outside the window could be the true maximum (its best-case RL reaches the
// peak's worst case: a double dip), or no model passes the goodness-of-fit test.
// REQUIRES: context vectors the size of points.
DipFit fit_dip(const std::vector<PointResult>& points, std::size_t peak, const DipFitContext& context,
               double bandwidth_threshold_db, int erratic_jumps, const DipFitSettings& settings = {});

// Upper p-quantile of chi-square with n degrees of freedom by Wilson–Hilferty, z the one-sided
// normal quantile of p (Wilson & Hilferty 1931).
double chi2_upper_quantile(int n, double z);

}  // namespace echoline::core
