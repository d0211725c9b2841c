// Calibration-kit definitions: what the OPEN, SHORT, LOAD and the optional mismatch standards
// really are (|Γ|, fringing capacitance, inductance, offset delay, the LOAD's worst-case match
// against frequency, a mismatch's known |Γ| and phase) and the kit's identity, as plain values. Loading is in cal_kit_loader.hpp. Pure; thread-safe.
#pragma once

#include <complex>
#include <optional>
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

// A known mismatch (a termination other than Z0, e.g. 61.1 ohm: |Γ| = 0.1), possibly behind an
// offset line. Model: Γ = magnitude·e^(j·phase)·e^(−j2ωτ), τ the one-way offset delay. Measured
// at two offsets it separates the directivity leakage from the source match (MEASUREMENT.md §6.3).
struct MismatchStandard {
  std::string name;                    // as the operator and the traces know it, e.g. "MISMATCH-A"
  double magnitude = 0;                // nominal |Γ|, in (0, 0.5]
  double magnitude_tolerance = 0;      // the true |Γ| lies within ±this of `magnitude`
  double phase_rad = 0;                // Γ's phase at the standard's own plane (0: R > Z0, π: R < Z0)
  double offset_delay_s = 0;           // one-way electrical delay of its offset line, s
  double phase_tolerance_rad = 0;      // how far the true phase may be from the model's
};

// The offset line of the offset pair (MEASUREMENT.md §12): a line between the test port and the
// unit for a second reading of it, about a quarter wave long so that it turns the unit's
// reflection by half a turn (a quarter-wave adapter, or a switched-line arm), as its data sheet
// or its own measurement states it.
struct OffsetLine {
  double delay_s = 0;             // one-way electrical delay, nominal (1/(4·f) turns Γ by half a turn at f)
  double delay_tolerance_s = 0;   // |true − nominal| at most
  double loss_db = 0;             // one-way insertion loss, nominal, dB (≥ 0)
  double loss_tolerance_db = 0;   // |true − nominal| at most, over the band it is used in
  double match = 0;               // |S11|, |S22| bound of the line as connected, linear (connection included)
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
  std::vector<MismatchStandard> mismatch;   // optional; empty for a plain OPEN/SHORT/LOAD kit
  std::optional<OffsetLine> offset_line;    // optional; for recipes that read each unit twice
};

// The kit used when the station config names none: deliberately pessimistic figures for an
// unknown commercial N or SMA kit (common practice, no source), so the bounds stay honest.
CalKit builtin_conservative_kit();

// Model reflection coefficient of the OPEN / SHORT at f (magnitude 1; z0 in ohm).
std::complex<double> open_gamma(const ReflectStandard& s, double frequency_hz, double z0_ohm = 50);
std::complex<double> short_gamma(const ReflectStandard& s, double frequency_hz, double z0_ohm = 50);

// Model reflection coefficient of a mismatch standard at f:
//   Γ = magnitude·e^(j·phase)·e^(−j2·2πf·offset_delay).
std::complex<double> mismatch_gamma(const MismatchStandard& s, double frequency_hz);

// The kit's mismatch standard of that name, or nullptr.
const MismatchStandard* find_mismatch(const CalKit& kit, const std::string& name);

// Plain words for the operator: "61.1 ohm termination, no offset" (the resistance a real Γ of
// that magnitude and phase would be, against z0; "137 ps offset" when offset).
std::string describe_mismatch(const MismatchStandard& s, double z0_ohm = 50);

// Upper bound of the LOAD's |Γ| at f; 1.0 (nothing known) above the kit's last step.
double load_gamma_bound(const CalKit& kit, double frequency_hz);

}  // namespace echoline::core
