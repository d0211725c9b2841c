// Trim advice (daemon/core/trim.hpp). Formula L_new = L·f_meas/f_target
// (common practice, f ∝ 1/L).
#include "daemon/core/trim.hpp"

#include <gtest/gtest.h>

namespace echoline::core {
namespace {

// Computed: 163.0 mm resonating at 850 MHz, target 868 MHz -> 159.620 mm (shorten 3.38 mm).
TEST(Trim, ShortenExampleFromReference) {
  EXPECT_NEAR(trimmed_length_mm(163.0, 850e6, 868e6), 159.620, 0.0005);
  auto a = trim_advice(Trim{163.0, 868e6}, 850e6);
  ASSERT_TRUE(a);
  EXPECT_NEAR(a->change_mm, -3.380, 0.0005);
  EXPECT_NE(a->text.find("cut 3.4 mm off the element (163.0 \u2192 159.6 mm)"), std::string::npos) << a->text;
}

// Computed: 80.0 mm at 2.50 GHz, target 2.45 GHz -> 81.633 mm (lengthen).
TEST(Trim, LengthenExampleFromReference) {
  EXPECT_NEAR(trimmed_length_mm(80.0, 2.50e9, 2.45e9), 81.633, 0.0005);
  auto a = trim_advice(Trim{80.0, 2.45e9}, 2.50e9);
  ASSERT_TRUE(a);
  EXPECT_GT(a->change_mm, 0);
  EXPECT_NE(a->text.find("1.6 mm too short (80.0 \u2192 81.6 mm)"), std::string::npos) << a->text;
}

// ΔL = L·(1 − f_meas/f_target) for the 915 MHz whip: 77.9 mm at 892.7 MHz -> cut 1.9 mm to 76.0 mm.
TEST(Trim, WhipTextNamesAmountAndLengths) {
  auto a = trim_advice(Trim{77.9, 915e6}, 892.7e6);
  ASSERT_TRUE(a);
  EXPECT_NE(a->text.find("cut 1.9 mm off the element (77.9 \u2192 76.0 mm)"), std::string::npos) << a->text;
  auto edge = trim_advice(Trim{77.9, 915e6}, 860e6, /*at_least=*/true);
  ASSERT_TRUE(edge);
  EXPECT_NE(edge->text.find("cut at least"), std::string::npos);
}

TEST(Trim, NoAdviceWithoutUsableValues) {
  EXPECT_FALSE(trim_advice(Trim{0, 915e6}, 900e6));
  EXPECT_FALSE(trim_advice(Trim{78, 0}, 900e6));
  EXPECT_FALSE(trim_advice(Trim{78, 915e6}, 0));
  auto none = trim_advice(Trim{78, 915e6}, 915e6);
  ASSERT_TRUE(none);
  EXPECT_NE(none->text.find("no trim needed"), std::string::npos);
}

}  // namespace
}  // namespace echoline::core
