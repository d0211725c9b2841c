// Calibration-kit models (cal_kit.hpp). The OPEN/SHORT forms are the lumped-element and
// offset-line standard models of common practice (no source): a shunt capacitance at an open
// end, a series inductance at a short, a lossless offset line of the reference impedance.
#include "daemon/core/cal_kit.hpp"

#include <cmath>
#include <numbers>

namespace echoline::core {
namespace {
constexpr double kTwoPi = 2 * std::numbers::pi;
constexpr double kDegree = std::numbers::pi / 180;
}  // namespace

CalKit builtin_conservative_kit() {
  CalKit k;
  k.identity = "built-in conservative kit (no kit file named)";
  k.serial = "none";
  k.open.min_magnitude = 0.99;
  k.open.fringe_capacitance_f = 10e-15;
  k.open.phase_tolerance_rad = 5 * kDegree;
  k.short_.min_magnitude = 0.99;
  k.short_.inductance_h = 10e-12;
  k.short_.phase_tolerance_rad = 5 * kDegree;
  k.load = {LoadStep{3e9, 30}, LoadStep{6e9, 26}};
  k.connection_repeatability = std::pow(10.0, -50.0 / 20);   // 50 dB
  return k;
}

std::complex<double> open_gamma(const ReflectStandard& s, double f, double z0) {
  const double w = kTwoPi * f;
  const std::complex<double> end = std::complex<double>(1, -w * s.fringe_capacitance_f * z0) /
                                   std::complex<double>(1, w * s.fringe_capacitance_f * z0);
  return end * std::polar(1.0, -2 * w * s.offset_delay_s);
}

std::complex<double> short_gamma(const ReflectStandard& s, double f, double z0) {
  const double w = kTwoPi * f;
  const std::complex<double> jwl(0, w * s.inductance_h);
  return (jwl - z0) / (jwl + z0) * std::polar(1.0, -2 * w * s.offset_delay_s);
}

double load_gamma_bound(const CalKit& kit, double f) {
  for (const LoadStep& s : kit.load) {
    if (f <= s.up_to_hz) return std::pow(10.0, -s.min_return_loss_db / 20);
  }
  return 1.0;
}

}  // namespace echoline::core
