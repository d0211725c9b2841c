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
  EXPECT_DOUBLE_EQ(ok("1 MHZ"), 1e6);   // SCPI's upper-case spelling: still mega
  EXPECT_DOUBLE_EQ(ok("2.45 GHZ"), 2.45e9);
}

// SI prefixes (from memory): a lower-case m is milli, so "mHz" is a millihertz, never a megahertz.
// A recipe that says "970 mHz" almost surely means 970 MHz: refused with that hint, not guessed.
TEST(FrequencyText, MillihertzIsRefusedWithAHint) {
  for (const char* milli : {"970 mHz", "970 mhz", "970mHZ"}) {
    auto r = parse_frequency(milli);
    EXPECT_FALSE(r.ok()) << milli;
    if (!r.ok()) {
      EXPECT_NE(r.error().message.find("mHz is millihertz; write MHz"), std::string::npos) << r.error().message;
      EXPECT_NE(r.error().message.find(milli), std::string::npos) << r.error().message;
    }
  }
}

// Kilo: SI writes a lower-case k (from memory); an upper-case K has no other meaning in a
// frequency unit, so "10 KHz" and "10 KHZ" are accepted as kilohertz (config/README.md).
TEST(FrequencyText, KiloInEitherCase) {
  // kilo = 1e3 (SI prefix, from memory).
  EXPECT_DOUBLE_EQ(ok("10 KHz"), 10e3);
  EXPECT_DOUBLE_EQ(ok("10 KHZ"), 10e3);
  EXPECT_DOUBLE_EQ(ok("10 khz"), 10e3);
}

// Whether the text named a unit: a bare "860" is hertz, and the recipe loader asks about it.
TEST(FrequencyText, TellsWhetherAUnitWasWritten) {
  // A bare number is hertz (the project's rule, config/README.md); mega = 1e6 (SI prefix, from memory).
  auto bare = parse_frequency_text("860");
  ASSERT_TRUE(bare.ok());
  EXPECT_DOUBLE_EQ(bare->hz, 860);
  EXPECT_FALSE(bare->unit_given);
  auto with = parse_frequency_text(" 860 MHz ");
  ASSERT_TRUE(with.ok());
  EXPECT_DOUBLE_EQ(with->hz, 860e6);
  EXPECT_TRUE(with->unit_given);
  auto hertz = parse_frequency_text("860 Hz");
  ASSERT_TRUE(hertz.ok());
  EXPECT_TRUE(hertz->unit_given);
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
