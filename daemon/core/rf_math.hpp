// Scalar reflection arithmetic: return loss, |Γ|, VSWR, mismatch loss, and the worst/best
// true return loss a scalar reading allows given directivity and source match.
// Pure functions of doubles; thread-safe. Return loss is positive dB (RL = -20·log10|Γ|).
#pragma once

namespace echoline::core {

// |Γ| from return loss. RL = +inf -> 0. RL <= 0 -> 1 (a passive load cannot exceed 1).
double gamma_from_return_loss(double return_loss_db);
// Return loss from |Γ|. |Γ| = 0 -> +inf; |Γ| >= 1 -> 0 (clamped).
double return_loss_from_gamma(double gamma);
// VSWR = (1+|Γ|)/(1-|Γ|). |Γ| >= 1 -> +inf.
double vswr_from_gamma(double gamma);
// |Γ| = (VSWR-1)/(VSWR+1). VSWR <= 1 -> 0; VSWR = +inf -> 1.
double gamma_from_vswr(double vswr);
// Mismatch ("transmission") loss = -10·log10(1-|Γ|²), positive dB. |Γ| >= 1 -> +inf.
double mismatch_loss_from_gamma(double gamma);

double vswr_from_return_loss(double return_loss_db);
double return_loss_from_vswr(double vswr);
double mismatch_loss_from_return_loss(double return_loss_db);

// A reflection magnitude kept inside [0, 1]; `clamped` says it was outside (noisy scalar data:
// a reading above the |Γ| = 1 reference, or a negative value).
struct ClampedGamma {
  double value = 0;
  bool clamped = false;
};
ClampedGamma clamp_gamma(double gamma);

// 10^(-db/20): the linear magnitude of an error term given in dB (directivity, source match).
double rho_from_db(double db);

// Interval of the true return loss for a measured one (MEASUREMENT.md §1, one-port error model):
//   |Γ_true| ∈ |Γ_m| ± (ρ_D + ρ_S·|Γ_m|²),  ρ_D = 10^(-D/20), ρ_S = 10^(-M_S/20).
// worst = lowest true RL (upper |Γ| bound, clamped to |Γ| <= 1 so worst >= 0 dB);
// best  = highest true RL (+inf when the lower |Γ| bound is <= 0).
// `clamped` is set when the measured |Γ| was above 1 (measured RL < 0 dB) and was clamped.
// Pass source_match_db = +inf to ignore source match.
struct ReturnLossBounds {
  double worst_db = 0;
  double best_db = 0;
  bool clamped = false;
};
ReturnLossBounds return_loss_bounds(double measured_return_loss_db, double directivity_db,
                                    double source_match_db);

// Displayed thermal noise floor of a receiver: -174 dBm/Hz + 10·log10(RBW) + NF
// (kTB plus noise figure, common practice; −174 dBm/Hz is kT at 290 K). Log-averaging display effects are ignored.
double thermal_noise_floor_dbm(double rbw_hz, double noise_figure_db);

// dB <-> linear power helpers.
double db_to_power_ratio(double db);
double power_ratio_to_db(double ratio);

}  // namespace echoline::core
