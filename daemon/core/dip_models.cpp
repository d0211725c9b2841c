// Unit models for the dip fit (dip_models.hpp).
#include "daemon/core/dip_models.hpp"

#include <cmath>
#include <numbers>

namespace echoline::core {

const char* to_string(DipModel m) {
  switch (m) {
    case DipModel::series_rlc: return "series-rlc";
    case DipModel::line_monopole: return "line-monopole";
  }
  return "series-rlc";
}

std::complex<double> dip_gamma(const DipShape& s, double f, double z0) {
  using cd = std::complex<double>;
  if (s.model == DipModel::series_rlc) {
    // Z = R + jX, X = X0·(f/f0 − f0/f). With ρ = z0/(R + z0) and t = X/(R + z0) = tan φ,
    // Γ = (Z − z0)/(Z + z0) = 1 − 2z0/(R + z0 + jX) = 1 − ρ·(1 + e^(−j2φ)): a circle of radius ρ
    // centred on 1 − ρ (the series resonance's impedance circle, any microwave text).
    const double phi = std::atan(s.b * (f / s.a - s.a / f));
    return cd(1 - s.c, 0) - s.c * std::polar(1.0, -2 * phi);
  }
  // Transmission-line model of a thin monopole of height h (an open-ended line of impedance
  // Z_a, radiation resistance referred to the current maximum; Balanis, Antenna Theory, ch. 4
  // and 9, from memory): Z = R/sin²(kh) − j·Z_a·cot(kh), kh = π/2 at the quarter wave.
  const double kh = 0.5 * std::numbers::pi * f / s.a;
  const double sn = std::sin(kh);
  const cd z(s.c / (sn * sn), -s.b * std::cos(kh) / sn);
  return (z - z0) / (z + z0);
}

double dip_resonance_hz(const DipShape& s, double low_hz, double high_hz) {
  if (s.model == DipModel::series_rlc) return s.a;
  // |Γ| is unimodal near the quarter wave (R varies slowly, X crosses zero once).
  const double g = (std::sqrt(5.0) - 1) / 2;
  double a = low_hz, b = high_hz;
  double x1 = b - g * (b - a), x2 = a + g * (b - a);
  double f1 = std::abs(dip_gamma(s, x1)), f2 = std::abs(dip_gamma(s, x2));
  for (int i = 0; i < 80 && b - a > 1.0; ++i) {
    if (f1 < f2) {
      b = x2;
      x2 = x1;
      f2 = f1;
      x1 = b - g * (b - a);
      f1 = std::abs(dip_gamma(s, x1));
    } else {
      a = x1;
      x1 = x2;
      f1 = f2;
      x2 = a + g * (b - a);
      f2 = std::abs(dip_gamma(s, x2));
    }
  }
  return (a + b) / 2;
}

}  // namespace echoline::core
