// Reference checks of the sine and cosine integrals against Abramowitz & Stegun, Handbook of
// Mathematical Functions (1964), Table 5.1, and their limits.
#include "simulator/physics/special_functions.hpp"

#include <cmath>
#include <numbers>
#include <stdexcept>

#include <gtest/gtest.h>

namespace echoline::sim {
namespace {

constexpr double kPi = std::numbers::pi;

struct TableRow {
  double x, si, ci;
};

TEST(SpecialFunctions, SineAndCosineIntegralsMatchTheHandbookTable) {
  // A&S Table 5.1 (x Si(x), Ci(x) - ln x - gamma tabulated for x <= 10; values at 9 decimals,
  // from memory, cross-checked with an independent arbitrary-precision evaluation).
  const TableRow rows[] = {
      {0.5, 0.493107418, -0.177784079}, {1.0, 0.946083070, 0.337403923},  {2.0, 1.605412977, 0.422980829},
      {3.0, 1.848652528, 0.119629786},  {5.0, 1.549931245, -0.190029750}, {10.0, 1.658347594, -0.045456433},
  };
  for (const TableRow& r : rows) {
    EXPECT_NEAR(sine_integral(r.x), r.si, 1e-9) << "Si(" << r.x << ")";
    EXPECT_NEAR(cosine_integral(r.x), r.ci, 1e-9) << "Ci(" << r.x << ")";
  }
  // The values the brief of the wire model names: Si(1) = 0.946083, Ci(1) = 0.337404 (A&S Table 5.1)
  EXPECT_NEAR(sine_integral(1.0), 0.946083, 5e-7);
  EXPECT_NEAR(cosine_integral(1.0), 0.337404, 5e-7);
}

TEST(SpecialFunctions, KnownConstantsAndLimits) {
  // Si(pi) = 1.851937052 (the Wilbraham-Gibbs constant; A&S 5.2, from memory)
  EXPECT_NEAR(sine_integral(kPi), 1.851937052, 1e-9);
  // Si(x) -> pi/2 and Ci(x) -> 0 as x -> infinity, with |Si - pi/2| and |Ci| below 1/x
  // (A&S 5.2.8, 5.2.9 and the auxiliary functions f, g of 5.2.6, 5.2.7)
  for (const double x : {20.0, 100.0, 1000.0}) {
    EXPECT_LT(std::abs(sine_integral(x) - kPi / 2), 1.0 / x) << x;
    EXPECT_LT(std::abs(cosine_integral(x)), 1.0 / x) << x;
  }
  // Ci(20) = 0.044419821, Si(20) = 1.548241701 (A&S Table 5.2 region, from memory)
  EXPECT_NEAR(sine_integral(20.0), 1.548241701, 1e-9);
  EXPECT_NEAR(cosine_integral(20.0), 0.044419821, 1e-9);
  // Cin(2 pi) = gamma + ln(2 pi) - Ci(2 pi), Ci(2 pi) = -0.0225607 (A&S 5.2.2; from memory):
  // 2.43765. Balanis, Antenna Theory, eq. 4-93 (half-wave dipole) rounds it to 2.435.
  EXPECT_NEAR(cin_integral(2 * kPi), 2.43765, 1e-5);
}

TEST(SpecialFunctions, SymmetryAndSmallArguments) {
  // Si is odd, Cin even (A&S 5.2.19, 5.2.20 follow from the integrands)
  EXPECT_DOUBLE_EQ(sine_integral(-2.5), -sine_integral(2.5));
  EXPECT_DOUBLE_EQ(cin_integral(-2.5), cin_integral(2.5));
  EXPECT_EQ(sine_integral(0.0), 0.0);
  // Leading series terms: Si(x) ~ x - x^3/18, Cin(x) ~ x^2/4 (A&S 5.2.14, 5.2.16)
  EXPECT_NEAR(sine_integral(1e-3), 1e-3 - 1e-9 / 18, 1e-17);
  EXPECT_NEAR(cin_integral(1e-3), 1e-6 / 4, 1e-13);
  // Cin = gamma + ln x - Ci (A&S 5.2.2) on both sides of the series / continued-fraction switch
  for (const double x : {0.3, 3.9, 4.0, 4.1, 7.0}) {
    EXPECT_NEAR(cin_integral(x), kEulerGamma + std::log(x) - cosine_integral(x), 1e-12) << x;
  }
  EXPECT_THROW(cosine_integral(0.0), std::domain_error);
  EXPECT_THROW(cosine_integral(-1.0), std::domain_error);
}

TEST(SpecialFunctions, NoStepWhereTheMethodChanges) {
  // Series below x = 4, continued fraction above: across the switch each changes by its
  // derivative (sin x / x and cos x / x, A&S 5.2.1, 5.2.2) times the step, and nothing more.
  const double h = 1e-6;
  EXPECT_NEAR(sine_integral(4.0 + h) - sine_integral(4.0 - h), 2 * h * std::sin(4.0) / 4.0, 1e-13);
  EXPECT_NEAR(cosine_integral(4.0 + h) - cosine_integral(4.0 - h), 2 * h * std::cos(4.0) / 4.0, 1e-13);
  // A&S Table 5.1 at x = 4: Si 1.758203139, Ci -0.140981698 (from memory, cross-checked)
  EXPECT_NEAR(sine_integral(4.0), 1.758203139, 1e-9);
  EXPECT_NEAR(cosine_integral(4.0), -0.140981698, 1e-9);
}

}  // namespace
}  // namespace echoline::sim
