// The offset pair: a unit read twice, once on the test port and once through an offset line
// that turns its reflection by about half a turn. The sum of the two powers (the second scaled
// by the line's loss) no longer holds the leakage-times-unit cross term (parallelogram law), so
// |Γ| is bounded by second-order terms instead of by the directivity. Pure; thread-safe.
// Derivation, assumptions and numbers: daemon/core/MEASUREMENT.md §12. The line (OffsetLine) is
// defined in the calibration kit (cal_kit.hpp).
#pragma once

#include "daemon/core/cal_kit.hpp"

namespace echoline::core {

// One point of the pair, as the station has it.
struct OffsetPairPoint {
  double frequency_hz = 0;
  double p_direct = 0;            // 10^((P − R)/10): the unit on the port, relative to the reference R
  double p_offset = 0;            // the same through the offset line
  double reference_low_db = 0;    // R − T ∈ [low, high] (bounded), as in the budget (§3.2)
  double reference_high_db = 0;
  double reference_sigma_db = 0;  // standard uncertainty of R (common to both readings)
  double sigma_direct_db = 0;     // standard uncertainty of each reading, dB (§3.4)
  double sigma_offset_db = 0;
  double coverage_factor = 3;     // k for the statistical terms
  double directivity_low = 0;     // |E_D| ∈ [low, high] relative to T, linear (low = 0 is always safe)
  double directivity_high = 0;
  double source_match = 0;        // |E_S| bound, linear
  double connection = 0;          // the unit's own connection, k·u_conn (§3.5), linear; made anew for each reading
};

struct OffsetPairInterval {
  double gamma_low = 0, gamma_high = 1;   // |Γ| of the unit (bounded terms worst case + k·statistical)
  // The pair's own estimate of |Γ| (nominal line loss and reference, the leakage's mean square
  // over its interval, no residual), inside [gamma_low, gamma_high]: the value to show.
  double gamma_estimate = 0;
  double turn_error_rad = 0;     // largest |arg(offset turn) − π| the line's delay allows at this frequency
  double residual = 0;           // bound on the terms the sum leaves (|Γ|² units, before dividing by 1 + a)
  double g2_noise = 0;           // the readings' noise at the coverage factor, in |Γ|² (already expanded)
  // false when the line's delay tolerance allows a turn more than a quarter turn from half a
  // turn at this frequency: the pair then cancels too little to be worth using (gamma_* = [0, 1]).
  bool usable = false;
};

// REQUIRES: p_direct, p_offset > 0; directivity_low ≤ directivity_high; source_match, match < 0.5;
// a passive unit (|Γ| ≤ 1).
OffsetPairInterval combine_offset_pair(const OffsetPairPoint& point, const OffsetLine& line);

// What the pair leaves of a unit's |Γ| interval, for predictions before any unit is read: half
// the interval's width around |Γ| = g at `frequency_hz`, for a leakage known to lie in
// [directivity_low, directivity_high] (its phase then does not matter), readings of σ
// `sigma_db`, a source match, the unit's connection (k·u_conn) and the reference's error (R − T
// in [low, high], σ) as in OffsetPairPoint. At most `fallback` (one reading's radius), and
// `fallback` where the line is too far from half a turn.
double offset_pair_error_radius(double g, double frequency_hz, double directivity_low, double directivity_high,
                                double source_match, double connection, double sigma_db, double coverage_factor,
                                const OffsetLine& line, double fallback, double reference_low_db = 0,
                                double reference_high_db = 0, double reference_sigma_db = 0);

// The largest |arg(t²) − π| over the line's delay tolerance at `frequency_hz` (t: the line's
// one-way transmission), radians in [0, π].
double offset_turn_error(double frequency_hz, const OffsetLine& line);

}  // namespace echoline::core
