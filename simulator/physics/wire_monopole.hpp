// A thin straight wire monopole over a perfect ground plane, modelled near its first resonance
// as an open-ended transmission line whose radiation resistance rises with frequency.
// Pure functions of frequency; the Dut is immutable after construction.
#pragma once

#include <memory>

#include "simulator/physics/bench.hpp"

namespace echoline::sim {

// Speed of light in vacuum, m/s (exact, SI) and the impedance of free space, ohm
// (eta0 = mu0 * c, CODATA 2018: 376.730313668).
inline constexpr double kSpeedOfLight = 299792458.0;
inline constexpr double kFreeSpaceImpedance = 376.730313668;

struct WireMonopoleParams {
  double element_length_mm = 0;    // h: this unit's element, feed to tip
  double nominal_length_mm = 0;    // the design length
  double wire_diameter_mm = 0;     // 2a
  double loss_resistance_ohm = 0;  // ohmic loss of the element, spread along it, in ohm at the
                                   // feed of a quarter-wave element (see wire_monopole_impedance)
  double extra_loss_ohm = 0;       // a corroded, resistive joint between feed pin and element
                                   // ("lossy"): in series at the feed, not transformed
  double feed_inductance_nh = 0;   // the feed pin between the coax and the element, in series
};

// Radiation resistance of a centre-fed thin dipole of total length l, referred to the current
// maximum, as a function of kl = 2*pi*l/lambda (Balanis, Antenna Theory, eq. 4-70, with
// C + ln x - Ci(x) written as Cin(x)):
//   R = eta0/(2 pi) { Cin(kl) + 1/2 sin(kl) [Si(2kl) - 2 Si(kl)] + 1/2 cos(kl) [2 Cin(kl) - Cin(2kl)] }.
// REQUIRES: kl > 0.
double dipole_radiation_resistance_ohm(double kl);

// A monopole of height h over a perfect ground plane radiates into half space: half the
// resistance of the dipole of length 2h (image theory; Balanis §4.7.4). REQUIRES: kh > 0.
double monopole_radiation_resistance_ohm(double kh);

// Schelkunoff's average characteristic impedance of a monopole of height h and radius a,
// Z_a = 60 (ln(2h/a) - 1) ohm (half the dipole's 120 (ln(2h/a) - 1); S. A. Schelkunoff and
// H. T. Friis, Antennas: Theory and Practice, 1952, from memory). REQUIRES: 2h/a > e.
double monopole_characteristic_impedance_ohm(double height_m, double radius_m);

// Input reactance of a monopole exactly a quarter wave high: eta0/(8 pi) Si(2 pi) = 21.26 ohm
// (half the half-wave dipole's 42.5 ohm; Balanis eqs. 4-71, 4-93 and 4-106).
double quarter_wave_monopole_reactance_ohm();

// End effect: h_eff = h (1 + delta), chosen so that the line reactance -Z_a cot(beta h_eff)
// equals quarter_wave_monopole_reactance_ohm() at beta h = pi/2:
// delta = (2/pi) atan(X_qw / Z_a). A thicker wire (lower Z_a) gets a larger delta.
double monopole_end_effect(double characteristic_impedance_ohm);

// Input impedance at the feed (ohm), first resonance (Balanis, Schelkunoff):
//   Z_in = R_r(kh) / sin^2(kh) + R_loss g(kh) / sin^2(kh) + R_extra - j Z_a cot(k h_eff) + j w L_feed,
// R_r the monopole radiation resistance referred to the current maximum (Balanis: R_in =
// R_r / sin^2(kl/2)), k = 2 pi f / c, g(x) = 1 - sin(2x)/(2x) for a loss spread evenly along
// the wire (= 1 at the quarter wave, so loss_resistance_ohm is ohms at the feed there). Below
// kh = 0.02 the radiation resistance takes its short-monopole limit eta0 (kh)^2 / (12 pi)
// (Balanis eq. 4-37, halved), where the series above would cancel. The thin-wire formulas have a pole at kh = pi; above
// kh = 0.9 pi (about 1.7 GHz for a 78 mm element) the model holds the value it has there.
// REQUIRES: lengths and diameter > 0, element_length_mm / wire_diameter_mm > 1.4 (2h/a > e),
// resistances and inductance >= 0 (std::invalid_argument otherwise).
Complex wire_monopole_impedance(const WireMonopoleParams& p, double frequency_hz);

// Frequency where the element's own reactance -Z_a cot(k h_eff) crosses zero (Hz):
// c / (4 h_eff). The return-loss maximum is elsewhere (see physics/truth.hpp).
double wire_monopole_reactance_zero_hz(const WireMonopoleParams& p);

// The unit as a Dut (Gamma on 50 ohm). Same REQUIRES as wire_monopole_impedance.
std::unique_ptr<Dut> make_wire_monopole(const WireMonopoleParams& p);

}  // namespace echoline::sim
