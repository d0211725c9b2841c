// The offset line's physics (simulator/physics/offset_line.hpp): an ideal line turns the unit's
// reflection by the round-trip delay, a matched lossy one scales it by the round-trip loss, the
// connector steps stay lossless and inside the bound derived in simulator/README.md.
#include "simulator/physics/offset_line.hpp"

#include <algorithm>
#include <cmath>
#include <limits>
#include <numbers>

#include <gtest/gtest.h>

namespace echoline::sim {
namespace {

constexpr double kPi = std::numbers::pi;
constexpr double kF = 915e6;

// A line with nothing but delay and loss: no connector reflection (infinite return loss).
OffsetLineParams ideal(double delay_ps, double loss_db) {
  OffsetLineParams p;
  p.delay_ps = delay_ps;
  p.loss_db = loss_db;
  p.match_return_loss_db = std::numeric_limits<double>::infinity();
  return p;
}

// One connector step's largest move of a load g: |Gamma_in - g| <= rho + rho g (rho + g)/(1 - rho g)
// (derived in simulator/README.md, "The offset line", from the step's terminated-two-port form).
double step_bound(double rho, double g) { return rho + rho * g * (rho + g) / (1.0 - rho * g); }

TEST(PhysicsOffsetLine, IdealLineTurnsGammaByTheRoundTripDelay) {
  // Lossless line: Gamma_in = Gamma_L e^(-j 2 w tau) (the lossless-line input reflection,
  // Pozar, Microwave Engineering, 4th ed., ch. 2; from memory).
  const OffsetLineParams p = ideal(273.2, 0);
  for (Complex g : {Complex(0.3, 0), Complex(0.1, -0.4), Complex(-0.8, 0.5)}) {
    const Complex expected = g * std::polar(1.0, -2.0 * 2.0 * kPi * kF * 273.2e-12);
    EXPECT_LT(std::abs(offset_line_gamma(p, g, kF) - expected), 1e-12) << g;
  }
  // 273.2 ps is a quarter wave at 915 MHz (1 / (4 * 915 MHz) = 273.22 ps, computed): half a
  // turn round trip, so 0.3 comes back as -0.3 (the residue is the 0.02 ps rounding).
  const Complex turned = offset_line_gamma(p, 0.3, kF);
  EXPECT_NEAR(turned.real(), -0.3, 1e-6);
  EXPECT_NEAR(turned.imag(), 0.0, 1e-4);
  // The default line as built, 274.0 ps, turns a little past half a turn:
  // 2 * 360 * 915e6 * 274e-12 = 180.511 degrees (computed), so arg = 360 - 180.511.
  EXPECT_NEAR(std::arg(offset_line_gamma(ideal(274.0, 0), 0.3, kF)) * 180 / kPi, 179.489, 0.001);
}

TEST(PhysicsOffsetLine, MatchedLossyLineScalesGammaByTheRoundTripLoss) {
  // |S21|^2 both ways: |Gamma_in| = 10^(-2L/20) |Gamma_L| (definition of insertion loss, from memory).
  for (double loss : {0.08, 0.5, 3.0}) {
    const Complex g = std::polar(0.45, 1.1);
    EXPECT_NEAR(std::abs(offset_line_gamma(ideal(274.0, loss), g, kF)), 0.45 * std::pow(10.0, -2 * loss / 20), 1e-12) << loss;
  }
  // loss_db is given at 915 MHz and grows as sqrt(f) (skin effect, common practice, no source):
  // at 4 x 915 MHz the line loses twice as much.
  OffsetLineParams p = ideal(274.0, 0.08);
  EXPECT_NEAR(offset_line_loss_db(p, 4 * kF), 0.16, 1e-12);
  EXPECT_NEAR(std::abs(offset_line_gamma(p, 0.45, 4 * kF)), 0.45 * std::pow(10.0, -2 * 0.16 / 20), 1e-12);
}

TEST(PhysicsOffsetLine, ConnectorStepIsLosslessAndReciprocal) {
  // A lossless two-port has a unitary S matrix, S^H S = I (from memory); a reciprocal one S12 = S21.
  const TwoPort s = connector_step(std::polar(0.2, 40 * kPi / 180));
  EXPECT_EQ(s.s12, s.s21);
  EXPECT_NEAR(std::norm(s.s11) + std::norm(s.s21), 1.0, 1e-15);
  EXPECT_NEAR(std::norm(s.s12) + std::norm(s.s22), 1.0, 1e-15);
  EXPECT_LT(std::abs(std::conj(s.s11) * s.s12 + std::conj(s.s21) * s.s22), 1e-15);
  // So a lossless line between two such steps, ended in a full reflection, reflects fully at
  // any frequency (conservation of energy, from memory); with the unit passive, |Gamma_in| <= 1.
  OffsetLineParams p = ideal(274.0, 0);
  p.match_return_loss_db = 14;   // a poor connector, |r| = 0.2, to make any leak visible
  for (double f : {0.4e9, 0.915e9, 2.45e9}) {
    for (double phase : {-3.0, -1.0, 0.0, 0.7, 2.5}) {
      EXPECT_NEAR(std::abs(offset_line_gamma(p, std::polar(1.0, phase), f)), 1.0, 1e-12) << f << " " << phase;
      EXPECT_LE(std::abs(offset_line_gamma(p, std::polar(0.6, phase), f)), 1.0) << f << " " << phase;
    }
  }
}

TEST(PhysicsOffsetLine, ConnectorStepsMoveGammaNoMoreThanTheDerivedBound) {
  // Bound (simulator/README.md, "The offset line"; derived, no source): with a = 10^(-2L/20)
  // e^(-j 2 w tau) the matched line's round trip and Gamma_b what the input step sees,
  // |Gamma_in - a Gamma_u| <= step_bound(rho, |Gamma_b|) + |a| step_bound(rho, |Gamma_u|),
  // and |Gamma_b| <= |a| (|Gamma_u| + step_bound(rho, |Gamma_u|)).
  OffsetLineParams p;   // the defaults as built: 274 ps, 0.08 dB, 46 dB connectors at 40 and -70 degrees
  const double rho = std::pow(10.0, -p.match_return_loss_db / 20);
  double worst_ratio = 0;
  for (double f = 800e6; f <= 1030e6; f += 10e6) {
    const double a_mag = std::pow(10.0, -2 * offset_line_loss_db(p, f) / 20);
    const Complex a = a_mag * std::polar(1.0, -2 * 2 * kPi * f * p.delay_ps * 1e-12);
    for (double mag : {0.0, 0.05, 0.3, 0.7, 1.0}) {
      for (int k = 0; k < 24; ++k) {
        const Complex g = std::polar(mag, 2 * kPi * k / 24);
        const double gb = std::min(1.0, a_mag * (mag + step_bound(rho, mag)));
        const double bound = step_bound(rho, gb) + a_mag * step_bound(rho, mag);
        const double moved = std::abs(offset_line_gamma(p, g, f) - a * g);
        EXPECT_LE(moved, bound) << f << " " << g;
        worst_ratio = std::max(worst_ratio, moved / bound);
      }
    }
  }
  // The bound is not loose: somewhere in the band the two reflections nearly add up.
  EXPECT_GT(worst_ratio, 0.8);
  // At the defaults (rho = 10^(-46/20) = 0.00501) the whole move stays within
  // 2 * 2 rho / (1 - rho) = 0.02015 (computed) for any passive unit.
  EXPECT_NEAR(2 * step_bound(rho, 1.0), 0.02015, 1e-5);
}

}  // namespace
}  // namespace echoline::sim
