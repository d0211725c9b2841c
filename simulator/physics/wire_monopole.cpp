// The wire monopole: Balanis's radiation resistance through Si/Ci, Schelkunoff's average
// characteristic impedance for the reactance, an end effect that reproduces the quarter-wave
// reactance, ohmic and defect losses, and the feed pin's inductance.
#include "simulator/physics/wire_monopole.hpp"

#include <algorithm>
#include <cmath>
#include <numbers>
#include <stdexcept>
#include <string>

#include <fmt/format.h>

#include "simulator/physics/dut_models.hpp"
#include "simulator/physics/special_functions.hpp"

namespace echoline::sim {
namespace {

constexpr double kPi = std::numbers::pi;
constexpr double kShortLimitKh = 0.02;      // below: short-monopole limit of the resistance
constexpr double kHoldKh = 0.9 * kPi;       // above: the value at 0.9 pi is held

void check(const WireMonopoleParams& p) {
  if (!(p.element_length_mm > 0) || !(p.nominal_length_mm > 0) || !(p.wire_diameter_mm > 0) ||
      !(p.element_length_mm / p.wire_diameter_mm > 1.4) || !(p.loss_resistance_ohm >= 0) || !(p.extra_loss_ohm >= 0) ||
      !(p.feed_inductance_nh >= 0)) {
    throw std::invalid_argument(
        "wire monopole: lengths and diameter must be > 0, the element longer than 1.4 diameters, "
        "resistances and inductance >= 0");
  }
}

// A loss resistance R spread evenly along the wire, given at the quarter wave: a current
// I_m sin(k(h - z)) dissipates 1/2 R' I_m^2 (h/2) g(kh) with g(x) = 1 - sin(2x)/(2x)
// (integral of sin^2), and I_feed = I_m sin(kh). With R' h/2 = R at kh = pi/2 (g = 1), the
// loss at the feed is R g(kh) / sin^2(kh); its short-wire limit is 2R/3. R' is taken constant
// over frequency (skin effect would add a factor sqrt(f), 6 % across 860-970 MHz).
double loss_transfer(double kh) {
  if (kh < kShortLimitKh) return 2.0 / 3.0;
  const double s = std::sin(kh);
  return (1.0 - std::sin(2 * kh) / (2 * kh)) / (s * s);
}

double characteristic_impedance(const WireMonopoleParams& p) {
  return monopole_characteristic_impedance_ohm(p.element_length_mm * 1e-3, p.wire_diameter_mm * 0.5e-3);
}

class WireMonopole final : public Dut {
 public:
  explicit WireMonopole(const WireMonopoleParams& p) : p_(p) { check(p_); }
  Complex gamma(double f) const override { return gamma_of_impedance(wire_monopole_impedance(p_, f), 50.0); }
  std::string describe() const override {
    return fmt::format("wire monopole, element {:.3f} mm, wire {:.2f} mm, loss {:.1f} ohm, X = 0 at {:.3f} MHz",
                       p_.element_length_mm, p_.wire_diameter_mm, p_.loss_resistance_ohm + p_.extra_loss_ohm,
                       wire_monopole_reactance_zero_hz(p_) / 1e6);
  }

 private:
  WireMonopoleParams p_;
};

}  // namespace

double dipole_radiation_resistance_ohm(double kl) {
  if (!(kl > 0)) throw std::invalid_argument("dipole radiation resistance: kl must be > 0");
  const double braces = cin_integral(kl) + 0.5 * std::sin(kl) * (sine_integral(2 * kl) - 2 * sine_integral(kl)) +
                        0.5 * std::cos(kl) * (2 * cin_integral(kl) - cin_integral(2 * kl));
  return kFreeSpaceImpedance / (2 * kPi) * braces;
}

double monopole_radiation_resistance_ohm(double kh) { return 0.5 * dipole_radiation_resistance_ohm(2 * kh); }

double monopole_characteristic_impedance_ohm(double height_m, double radius_m) {
  const double ratio = 2 * height_m / radius_m;
  if (!(height_m > 0) || !(radius_m > 0) || !(ratio > std::numbers::e)) {
    throw std::invalid_argument("monopole characteristic impedance: needs 2h/a > e");
  }
  return 60.0 * (std::log(ratio) - 1.0);
}

double quarter_wave_monopole_reactance_ohm() { return kFreeSpaceImpedance / (8 * kPi) * sine_integral(2 * kPi); }

double monopole_end_effect(double characteristic_impedance_ohm) {
  return 2.0 / kPi * std::atan(quarter_wave_monopole_reactance_ohm() / characteristic_impedance_ohm);
}

Complex wire_monopole_impedance(const WireMonopoleParams& p, double frequency_hz) {
  check(p);
  const double za = characteristic_impedance(p);
  const double h = p.element_length_mm * 1e-3;
  const double h_eff = h * (1.0 + monopole_end_effect(za));
  const double k = 2 * kPi * frequency_hz / kSpeedOfLight;
  const double kh = std::min(k * h, kHoldKh);
  const double kh_eff = std::min(k * h_eff, kHoldKh);
  const double sin2 = std::sin(kh) * std::sin(kh);
  const double r_radiation = kh < kShortLimitKh ? kFreeSpaceImpedance * kh * kh / (12 * kPi)
                                                : monopole_radiation_resistance_ohm(kh) / sin2;
  const double r_in = r_radiation + p.loss_resistance_ohm * loss_transfer(kh) + p.extra_loss_ohm;
  const double x_line = -za / std::tan(kh_eff);
  const double x_feed = 2 * kPi * frequency_hz * p.feed_inductance_nh * 1e-9;
  return {r_in, x_line + x_feed};
}

double wire_monopole_reactance_zero_hz(const WireMonopoleParams& p) {
  check(p);
  const double h_eff = p.element_length_mm * 1e-3 * (1.0 + monopole_end_effect(characteristic_impedance(p)));
  return kSpeedOfLight / (4 * h_eff);
}

std::unique_ptr<Dut> make_wire_monopole(const WireMonopoleParams& p) { return std::make_unique<WireMonopole>(p); }

}  // namespace echoline::sim
