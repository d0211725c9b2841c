// Physical models of a one-port unit's reflection near its resonance, for the dip fit
// (dip_fit.hpp): a series RLC and a transmission-line monopole, each seen through a feed line
// of unknown length. Derivations and sources: daemon/core/MEASUREMENT.md, "Fitting the unit".
// Pure; thread-safe.
#pragma once

#include <complex>

namespace echoline::core {

enum class DipModel { series_rlc, line_monopole };
const char* to_string(DipModel m);   // "series-rlc", "line-monopole"

// The model's three shape parameters (the feed and the error vector are the fit's own):
//   series_rlc:    a = f0 (Hz), b = loaded Q (Q·Z0/(R + Z0)), c = circle radius Z0/(R + Z0)
//   line_monopole: a = quarter-wave frequency f_q (Hz), b = the element's characteristic
//                  impedance Z_a (ohm), c = its resistance at f_q (ohm)
struct DipShape {
  DipModel model = DipModel::series_rlc;
  double a = 0, b = 0, c = 0;
};

// Reflection of the unit itself at its own terminals (no feed), reference impedance z0_ohm.
//   series RLC:   Γ = (1 − c) − c·e^(−j2φ), φ = atan(b·(f/a − a/f))   (a circle; MEASUREMENT.md)
//   TL monopole:  Z = c/sin²(kh) − j·b·cot(kh), kh = (π/2)·f/a;  Γ = (Z − z0)/(Z + z0)
std::complex<double> dip_gamma(const DipShape& s, double frequency_hz, double z0_ohm = 50);

// Frequency of the smallest |Γ| of the model (the unit's true resonance, largest return loss)
// within [low_hz, high_hz]: exact for the RLC (f0), a golden-section search for the monopole.
double dip_resonance_hz(const DipShape& s, double low_hz, double high_hz);

}  // namespace echoline::core
