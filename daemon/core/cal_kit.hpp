// Calibration-kit definitions: what the OPEN, SHORT and LOAD standards really are (|Γ|, fringing
// capacitance, inductance, offset delay, the LOAD's worst-case match against frequency) and the
// kit's identity, as plain values. Loading is in cal_kit_loader.hpp. Pure; thread-safe.
#pragma once

#include <complex>
#include <string>
#include <vector>

namespace echoline::core {

// A full reflector (OPEN or SHORT) as the kit's data sheet describes it.
//   OPEN:  Γ = e^(−j2ωτ)·(1 − jωC·Z0)/(1 + jωC·Z0)   (fringing capacitance C, offset delay τ)
//   SHORT: Γ = e^(−j2ωτ)·(jωL − Z0)/(jωL + Z0)       (inductance L, offset delay τ)
// scaled by a magnitude in [min_magnitude, 1] that the kit does not pin down further.
struct ReflectStandard {
  double min_magnitude = 1.0;          // |Γ| is at least this (1 = lossless)
  double fringe_capacitance_f = 0;     // OPEN only, farad
  double inductance_h = 0;             // SHORT only, henry
  double offset_delay_s = 0;           // one-way electrical delay of the offset line, s
  double phase_tolerance_rad = 0;      // how far the true phase may be from the model's
};

// One step of the LOAD's worst-case match: up to `up_to_hz`, |Γ_load| <= 10^(−min_return_loss_db/20).
struct LoadStep {
  double up_to_hz = 0;
  double min_return_loss_db = 0;
};

struct CalKit {
  std::string identity;                // e.g. "Echoline SIM-KIT-N"
  std::string serial;                  // the physical kit's serial number
  std::string source;                  // file it was loaded from ("" for the built-in kit)
  ReflectStandard open;
  ReflectStandard short_;
  std::vector<LoadStep> load;          // ascending up_to_hz; above the last step: not specified
  // Standard uncertainty of one connection's repeatability, as a reflection magnitude (linear).
  double connection_repeatability = 0;
};

// The kit used when the station config names none: deliberately pessimistic figures for an
// unknown commercial N or SMA kit (common practice, no source), so the bounds stay honest.
CalKit builtin_conservative_kit();

// Model reflection coefficient of the OPEN / SHORT at f (magnitude 1; z0 in ohm).
std::complex<double> open_gamma(const ReflectStandard& s, double frequency_hz, double z0_ohm = 50);
std::complex<double> short_gamma(const ReflectStandard& s, double frequency_hz, double z0_ohm = 50);

// Upper bound of the LOAD's |Γ| at f; 1.0 (nothing known) above the kit's last step.
double load_gamma_bound(const CalKit& kit, double frequency_hz);

}  // namespace echoline::core
