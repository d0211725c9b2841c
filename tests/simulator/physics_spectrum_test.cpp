// Reference checks of the analyzer model: Gaussian RBW shape and swept sweep time.
#include "simulator/physics/spectrum.hpp"

#include <cmath>

#include <gtest/gtest.h>

namespace echoline::sim {
namespace {

TEST(PhysicsSpectrum, GaussianRbwIsHalfPowerAtHalfTheBandwidth) {
  EXPECT_DOUBLE_EQ(rbw_response_db(0, 10e3), 0.0);
  // -3 dB bandwidth = RBW by definition (common practice); 10*log10(1/2) = -3.0103 dB
  EXPECT_NEAR(rbw_response_db(5e3, 10e3), -3.0103, 1e-4);
  EXPECT_NEAR(rbw_response_db(-5e3, 10e3), -3.0103, 1e-4);
  // Gaussian: the dB loss grows with the square of the offset: at +-RBW, 4 x 3.0103 dB
  EXPECT_NEAR(rbw_response_db(10e3, 10e3), -12.0412, 1e-4);
  EXPECT_LT(rbw_response_db(100e3, 10e3), -100.0);
}

TEST(PhysicsSpectrum, SweepTimeMatchesAn150CheckValues) {
  // ST = k*span/RBW^2, k = 2.5 (analog near-Gaussian RBW filters: k in 2..3, common practice)
  EXPECT_NEAR(sweep_time_s(100e6, 100e3, 100e3), 25.0e-3, 1e-9);
  EXPECT_NEAR(sweep_time_s(10e6, 10e3, 10e3), 250e-3, 1e-9);
  EXPECT_NEAR(sweep_time_s(50e6, 30e3, 30e3), 138.9e-3, 0.05e-3);
  EXPECT_NEAR(sweep_time_s(200e6, 1e6, 1e6, 2.0), 0.40e-3, 1e-9);
  EXPECT_NEAR(sweep_time_s(200e6, 1e6, 1e6, 3.0), 0.60e-3, 1e-9);
}

TEST(PhysicsSpectrum, NarrowerRbwOrVbwLengthensTheSweep) {
  const double base = sweep_time_s(100e6, 300e3, 300e3);
  // RBW / 3 -> ST x 9 (follows from ST ~ span/RBW^2)
  EXPECT_NEAR(sweep_time_s(100e6, 100e3, 100e3) / base, 9.0, 1e-9);
  // VBW < RBW lengthens the sweep (common practice, no source): here by RBW/VBW
  EXPECT_NEAR(sweep_time_s(100e6, 300e3, 100e3) / base, 3.0, 1e-9);
  // VBW wider than RBW changes nothing
  EXPECT_DOUBLE_EQ(sweep_time_s(100e6, 300e3, 3e6), base);
}

TEST(PhysicsSpectrum, ZeroSpanAndTinySpansStillTakeTime) {
  EXPECT_DOUBLE_EQ(sweep_time_s(0, 10e3, 10e3), kZeroSpanSweepTimeS);
  EXPECT_GT(kZeroSpanSweepTimeS, 0.0);
  EXPECT_DOUBLE_EQ(sweep_time_s(1.0, 1e6, 1e6), kMinSweepTimeS);
}

}  // namespace
}  // namespace echoline::sim
