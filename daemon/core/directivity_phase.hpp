// What a scalar OPEN/SHORT/LOAD calibration says about the phase of the directivity leakage
// d = e00/e01: |d| from the LOAD, the real part of d (rotated by the kit's model) from the OPEN
// and SHORT difference, and the bound the source match puts on that real part. The result says
// per point how well cos(arg d) is known, and whether the data support recovering the phase.
// Derivation and numbers: daemon/core/MEASUREMENT.md, "The directivity phase". Pure; thread-safe.
#pragma once

#include <vector>

#include "daemon/core/cal_kit.hpp"
#include "daemon/core/run_result.hpp"

namespace echoline::core {

struct DirectivityPhase {
  std::vector<double> frequency_hz;
  std::vector<double> magnitude_low, magnitude_high;  // |d| from the LOAD reading ± the LOAD's residual
  std::vector<double> real_part;         // Re(d·A) from (P_OPEN − P_SHORT), A = (1/Γ_O − 1/Γ_S)/2 of the kit
  std::vector<double> real_part_bound;   // what else (P_OPEN − P_SHORT) may hold: source match, loss, kit phase, noise
  std::vector<double> source_match_part; // ... of which the source match: |E_S|·|Γ_O − Γ_S|/2
  std::vector<double> cos_low, cos_high; // interval of cos(arg(d·A)); [−1, 1] when nothing is known
  std::vector<double> phase_half_width_deg;   // half the width of the phase interval (arccos), degrees
  double median_phase_half_width_deg = 180;
  // The phase is recoverable (to within ±45° at the median point): only then could a fit use
  // d(f) with its phase; otherwise d must stay a vector of bounded size and unknown phase.
  bool supported = false;
};

// REQUIRES: a calibration with OPEN, SHORT and LOAD traces and a budget of the same plan
// (build_calibration); without a SHORT nothing is known (supported = false, all intervals [−1, 1]).
DirectivityPhase recover_directivity_phase(const CalibrationRecord& cal, const CalKit& kit);

}  // namespace echoline::core
