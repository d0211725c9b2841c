// Scalar reflection arithmetic (rf_math.hpp). Formulas: MEASUREMENT.md §1 and §3; RL, VSWR and mismatch loss as textbooks define them (e.g. Pozar, Microwave Engineering, ch. 2; from memory).
#include "daemon/core/rf_math.hpp"

#include <algorithm>
#include <cmath>
#include <limits>

namespace echoline::core {
namespace {
constexpr double kInf = std::numeric_limits<double>::infinity();
}

double gamma_from_return_loss(double return_loss_db) {
  if (std::isinf(return_loss_db) && return_loss_db > 0) return 0.0;
  if (!(return_loss_db > 0)) return 1.0;
  return std::pow(10.0, -return_loss_db / 20.0);
}

double return_loss_from_gamma(double gamma) {
  if (!(gamma > 0)) return kInf;
  if (gamma >= 1) return 0.0;
  return -20.0 * std::log10(gamma);
}

double vswr_from_gamma(double gamma) {
  if (gamma >= 1) return kInf;
  if (gamma < 0) gamma = 0;
  return (1 + gamma) / (1 - gamma);
}

double gamma_from_vswr(double vswr) {
  if (std::isinf(vswr)) return 1.0;
  if (!(vswr > 1)) return 0.0;
  return (vswr - 1) / (vswr + 1);
}

double mismatch_loss_from_gamma(double gamma) {
  if (gamma >= 1) return kInf;
  if (gamma < 0) gamma = 0;
  return -10.0 * std::log10(1 - gamma * gamma);
}

double vswr_from_return_loss(double rl) { return vswr_from_gamma(gamma_from_return_loss(rl)); }
double return_loss_from_vswr(double vswr) { return return_loss_from_gamma(gamma_from_vswr(vswr)); }
double mismatch_loss_from_return_loss(double rl) { return mismatch_loss_from_gamma(gamma_from_return_loss(rl)); }

ClampedGamma clamp_gamma(double gamma) {
  if (std::isnan(gamma)) return {1.0, true};
  if (gamma < 0) return {0.0, true};
  if (gamma > 1) return {1.0, true};
  return {gamma, false};
}

double rho_from_db(double db) {
  if (std::isinf(db) && db > 0) return 0.0;
  return std::pow(10.0, -db / 20.0);
}

ReturnLossBounds return_loss_bounds(double measured_rl_db, double directivity_db, double source_match_db) {
  ReturnLossBounds out;
  // |Γ_m| from the measured RL; a negative RL means |Γ_m| > 1, which a passive DUT cannot have.
  double gm = std::isinf(measured_rl_db) && measured_rl_db > 0 ? 0.0 : std::pow(10.0, -measured_rl_db / 20.0);
  ClampedGamma c = clamp_gamma(gm);
  out.clamped = c.clamped;
  gm = c.value;
  const double err = rho_from_db(directivity_db) + rho_from_db(source_match_db) * gm * gm;
  const double upper = std::min(1.0, gm + err);
  const double lower = gm - err;
  out.worst_db = return_loss_from_gamma(upper);
  out.best_db = lower <= 0 ? kInf : return_loss_from_gamma(lower);
  return out;
}

double thermal_noise_floor_dbm(double rbw_hz, double noise_figure_db) {
  // kTB at 290 K is -173.975 dBm/Hz; the trade rounds to -174 (common practice).
  return -174.0 + 10.0 * std::log10(rbw_hz) + noise_figure_db;
}

double db_to_power_ratio(double db) { return std::pow(10.0, db / 10.0); }
double power_ratio_to_db(double ratio) { return 10.0 * std::log10(ratio); }

}  // namespace echoline::core
