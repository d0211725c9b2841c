// Frequency text parsing and formatting (daemon/core/frequency_text.hpp).
#include "daemon/core/frequency_text.hpp"

#include <clocale>

#include <gtest/gtest.h>

namespace echoline::core {
namespace {

double ok(std::string_view text) {
  auto r = parse_frequency(text);
  EXPECT_TRUE(r.ok()) << text << ": " << (r.ok() ? "" : r.error().message);
  return r.ok() ? *r : -1;
}

// Unit multipliers (IEEE 488.2 Table 7-1, as quoted in instrument programming manuals; MHZ is mega, not milli).
TEST(FrequencyText, ParsesUnitsAndBareHertz) {
  EXPECT_DOUBLE_EQ(ok("902 MHz"), 902e6);
  EXPECT_DOUBLE_EQ(ok("2.4835 GHz"), 2.4835e9);
  EXPECT_DOUBLE_EQ(ok("100 kHz"), 100e3);
  EXPECT_DOUBLE_EQ(ok("915e6"), 915e6);
  EXPECT_DOUBLE_EQ(ok("12 Hz"), 12);
  EXPECT_DOUBLE_EQ(ok("  868MHz "), 868e6);
  EXPECT_DOUBLE_EQ(ok("1 mhz"), 1e6);   // case-insensitive; never millihertz
  EXPECT_DOUBLE_EQ(ok("2.45 GHZ"), 2.45e9);
}

TEST(FrequencyText, RejectsBadText) {
  for (const char* bad : {"", "MHz", "902 MHzz", "902 m", "9O2 MHz", "nan", "inf Hz", "902,5 MHz", "1e999 Hz"}) {
    auto r = parse_frequency(bad);
    EXPECT_FALSE(r.ok()) << bad;
    if (!r.ok()) {
      EXPECT_NE(r.error().message.find("frequency"), std::string::npos);
    }
  }
}

// Locale independence: a decimal comma locale must not change parsing or formatting.
TEST(FrequencyText, IndependentOfLocale) {
  const char* set = std::setlocale(LC_ALL, "de_DE.UTF-8");
  EXPECT_DOUBLE_EQ(ok("2.4835 GHz"), 2.4835e9);
  EXPECT_EQ(format_frequency(2.4835e9), "2.4835 GHz");
  if (set) std::setlocale(LC_ALL, "C");
}

TEST(FrequencyText, FormatsInTheLargestUnit) {
  EXPECT_EQ(format_frequency(915e6), "915 MHz");
  EXPECT_EQ(format_frequency(902.5e6), "902.5 MHz");
  EXPECT_EQ(format_frequency(100e3), "100 kHz");
  EXPECT_EQ(format_mhz(897.4e6), "897.4 MHz");
  EXPECT_EQ(format_frequency_range(905e6, 925e6), "905\u2013925 MHz");
  EXPECT_EQ(format_frequency_range(2.4e9, 2.4835e9), "2.4\u20132.4835 GHz");
}

}  // namespace
}  // namespace echoline::core
