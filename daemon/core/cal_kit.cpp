// Calibration-kit models (cal_kit.hpp). The OPEN/SHORT forms are the lumped-element and
// offset-line standard models of common practice (no source): a shunt capacitance at an open
// end, a series inductance at a short, a lossless offset line of the reference impedance.
#include "daemon/core/cal_kit.hpp"

#include <cmath>
#include <numbers>

#include <fmt/format.h>

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

std::complex<double> mismatch_gamma(const MismatchStandard& s, double f) {
  return std::polar(s.magnitude, s.phase_rad - 2 * kTwoPi * f * s.offset_delay_s);
}

const MismatchStandard* find_mismatch(const CalKit& kit, const std::string& name) {
  for (const MismatchStandard& m : kit.mismatch) {
    if (m.name == name) return &m;
  }
  return nullptr;
}

std::string describe_mismatch(const MismatchStandard& s, double z0) {
  const std::complex<double> g = std::polar(s.magnitude, s.phase_rad);
  const std::complex<double> z = z0 * (1.0 + g) / (1.0 - g);
  std::string what;
  if (std::fabs(z.imag()) < 0.05 * std::fabs(z.real())) {
    what = fmt::format("{:.1f} ohm termination", z.real());
  } else {
    what = fmt::format("|\u0393| {:.3f} at {:.0f}\u00b0 termination", s.magnitude, s.phase_rad / kDegree);
  }
  const double ps = s.offset_delay_s * 1e12;
  return ps > 0 ? fmt::format("{}, {:.0f} ps offset", what, ps) : what + ", no offset";
}

double load_gamma_bound(const CalKit& kit, double f) {
  for (const LoadStep& s : kit.load) {
    if (f <= s.up_to_hz) return std::pow(10.0, -s.min_return_loss_db / 20);
  }
  return 1.0;
}

}  // namespace echoline::core
