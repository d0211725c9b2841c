// Whole numbers from command lines (drivers/whole_number.hpp): the whole text, one decimal
// integer, inside the range; everything else refused.
#include <gtest/gtest.h>

#include <limits>

#include "drivers/whole_number.hpp"

namespace echoline::drivers {
namespace {

TEST(WholeNumber, AcceptsTheRangeAndItsEnds) {
  EXPECT_EQ(parse_whole_number("0", 0, 65535), 0);
  EXPECT_EQ(parse_whole_number("65535", 0, 65535), 65535);
  EXPECT_EQ(parse_whole_number("5025", 0, 65535), 5025);
  EXPECT_EQ(parse_whole_number("-3", -5, 5), -3);
}

TEST(WholeNumber, RefusesOutsideTheRange) {
  EXPECT_FALSE(parse_whole_number("-1", 0, 65535));
  EXPECT_FALSE(parse_whole_number("65536", 0, 65535));
  EXPECT_FALSE(parse_whole_number("70000", 0, 65535));
  EXPECT_FALSE(parse_whole_number("99999999999999999999999", 0, std::numeric_limits<long long>::max()));
}

TEST(WholeNumber, RefusesAnythingButOneDecimalInteger) {
  for (const char* text : {"", " 1", "1 ", "12abc", "1.0", "1e3", "+5", "0x10", "--1", "５"}) {
    EXPECT_FALSE(parse_whole_number(text, -100, 100000)) << '"' << text << '"';
  }
}

TEST(WholeNumber, ErrorNamesOptionValueRangeAndMeaning) {
  EXPECT_EQ(whole_number_error("--tcp-port", "70000", 0, 65535, "0 = no TCP listener"),
            "--tcp-port 70000: expected a whole number from 0 to 65535 (0 = no TCP listener)");
  EXPECT_EQ(whole_number_error("--reps", "", 1, 1000), "--reps \"\": expected a whole number from 1 to 1000");
}

}  // namespace
}  // namespace echoline::drivers
