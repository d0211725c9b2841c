// Where the unit's own resonance lies, from the offset pair's sum: the two readings, weighted by
// the line's loss, less the LOAD reading, leave |Γ|² plus terms that are second order or that the
// half turn cancels, so the sum's vertex is the resonance to within a bound derived term by term
// (MEASUREMENT.md §12.1). Pure; thread-safe.
#pragma once

#include <cstddef>
#include <optional>
#include <vector>

#include "daemon/core/cal_kit.hpp"

namespace echoline::core {

// What bounds the terms the sum leaves; all magnitudes linear (|Γ| units), delays in seconds.
struct PairNuisance {
  double leakage = 0;            // E: bound of |E_D| over the dip
  double load_residual = 0;      // r_L: the LOAD's reflection with its connection, through the source match
  bool load_subtracted = true;   // false: no LOAD reading, |E_D|² itself must be bounded in slope
  double source_match = 0;       // |E_S|
  double connection = 0;         // k·u_conn of the unit's connection, each reading
  double error_delay_s = 5e-9;   // how fast the bench's error terms turn (MEASUREMENT.md §6.2)
  OffsetLine line;               // the kit's line (delay, loss, match, tolerances)
  double turn_error_rad = 0;     // the largest |arg(t²) − π| over the dip
  double reference_ratio = 0;    // largest |R/T − 1| the reference error allows (bounded part)
  // The same weighted by how fast its parts turn, as ratios at the error delay's rate: for the
  // slope (ω), the curvature (ω²) and the third derivative (ω³). Negative: all of reference_ratio turns at that rate.
  double reference_slope_ratio = -1;
  double reference_curvature_ratio = -1;
  double reference_third_ratio = -1;   // the same for the third derivative (ω³)
  // The lowest frequency the terms cover: the line's loss (coax: ∝ √f to ∝ f) changes by at most
  // (loss + tolerance)/f per Hz there. 0: unknown, taken as 1 MHz (wide bounds, never narrow).
  double frequency_hz = 0;
};

// The reference error R/T − 1 (uncertainty.cpp: a ripple of first and second order in the
// leakage and source match over the standards, and the standards' own loss) by parts: the first
// order turns at the error delay's rate, the second at twice it, the loss no faster than
// kStandardLossTurnDelayS. Raises `n`'s ratios to cover this point's; from the point's bounds
// (dB, as the budget states them), its leakage bound and the source match.
void cover_reference_turning(PairNuisance& n, double reference_low_db, double reference_high_db, double leakage,
                             double source_match);

// Allowances the kit does not state, taken generously (MEASUREMENT.md §12.1).
inline constexpr double kLoadTurnDelayS = 0.5e-9;        // the LOAD's own reflection turns no faster
inline constexpr double kConnectionTurnDelayS = 1.0e-9;  // the unit's connection error turns no faster
inline constexpr double kLineMatchExtraDelayS = 0.5e-9;  // beyond the line's round trip, for its ends
inline constexpr double kStandardLossTurnDelayS = 0.5e-9;  // the OPEN's and SHORT's own loss turns no faster

// Bound of the slope (per Hz) of everything in the sum besides the unit's own |Γ|² and what
// scales the whole sum (the reference error and the line's loss changing, T9, which the fit
// bounds on its window's samples), over a region where the unit's |Γ| ≤ g and |dΓ/df| ≤ s (per Hz).
double pair_nuisance_slope(const PairNuisance& n, double g, double s);

// Bound of the same terms' size (|Γ|² units) where the unit's |Γ| ≤ g.
double pair_nuisance_magnitude(const PairNuisance& n, double g);

// Bound of the same terms' second derivative (per Hz², T9 likewise apart), for the straight
// trajectory of §6.2.
double pair_nuisance_curvature(const PairNuisance& n, double g, double s);

// The sum at each plan point, as calibrate_points builds it.
struct PairSumTrace {
  std::vector<double> frequency_hz;
  std::vector<double> y;            // w·((p_A − L) + x̂·(p_B − L)), x̂ = 1/a nominal, w = x̂/(1 + x̂): ≈ |Γ|²
  std::vector<double> sigma_y;      // its standard uncertainty from the readings' noise
  std::vector<double> gamma_high;   // the point's upper |Γ| bound (the pair's, intersected)
  std::vector<double> return_loss_db;   // the return loss shown (the pair's estimate): the windows
  std::vector<double> leakage;      // E per point
  std::vector<double> load_residual;
  std::vector<double> turn_error_rad;
  std::vector<bool> usable;         // the pair was usable at the point
  PairNuisance nuisance;            // the bench; its leakage, load_residual and turn_error_rad are ignored (per point above)
  double coverage_factor = 3;
  bool empty() const { return y.empty(); }
};

struct PairShiftBound {
  double center_hz = 0;       // the sum's vertex
  double half_width_hz = 0;   // nuisance + k·σ + model gap + half a step
  double nuisance_hz = 0;     // what the terms the sum leaves can move the vertex, B₁/(2c(1 − ρ) − B₂)
  double statistical_hz = 0;  // k·σ of the vertex
  double gap_hz = 0;          // the cubic's minimum against the quadratic's
};

// The bound at the dip around `peak` (the sample with the smallest sum, or the pair's largest
// RL): the intersection of those over the points within 6, 3 and 1.5 dB of the bottom, or
// nothing where the assumptions fail for all three: the peak under 12 dB, fewer than 2 points in
// the window on either side, the window reaching the sweep's end, a point there where the pair
// was not usable, a quadratic that does not open upward or whose vertex lies outside the points,
// or a lopsided dip (the cubic's minimum far from the quadratic's).
std::optional<PairShiftBound> pair_shift_bound(const PairSumTrace& t, std::size_t peak);

// The predicted half-width for a nominal dip |Γ|² = g0² + s²(f − f₀)² (s per Hz) whose points'
// own upper bound is |Γ| + `radius`, the readings' noise at the coverage factor `noise_rel` of
// the power, sampled every `step_hz`: the station's bound over its 6, 3 and 1.5 dB windows, the
// smallest; +inf where none is given; before any unit is read (centring_prediction.cpp).
double pair_shift_half_width(const PairNuisance& n, double g0, double radius, double s, double step_hz,
                             double noise_rel);

}  // namespace echoline::core
