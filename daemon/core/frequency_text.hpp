// Frequencies as people write and read them: "902 MHz", "2.4835 GHz", "100 kHz", 915e6.
// Pure, locale-independent (std::from_chars / fmt); thread-safe.
#pragma once

#include <string>
#include <string_view>

#include "drivers/result.hpp"

namespace echoline::core {

// A parsed frequency and whether the text named its unit ("860" did not; "860 Hz" did).
struct FrequencyText {
  double hz = 0;
  bool unit_given = false;
};

// Parses "<number>[ ]<unit>" with unit Hz, kHz, MHz or GHz, or a bare number in Hz. Surrounding
// spaces are allowed. Letter case: "Hz" in any case, k or K is kilo, G or g giga; the mega prefix
// must be an upper-case M, because a lower-case m is SI's milli ("mHz" is refused with a hint
// rather than guessed). Rejects empty text, trailing characters, other units, NaN and infinity.
// Errors: ErrorKind::invalid_argument, message names the text and the accepted forms.
Result<FrequencyText> parse_frequency_text(std::string_view text);

// parse_frequency_text without the unit flag.
Result<double> parse_frequency(std::string_view text);

// "915 MHz", "902.5 MHz", "2.4835 GHz", "100 kHz", "12 Hz": the largest unit in which the value
// is >= 1, with up to `max_decimals` decimals and trailing zeros removed.
std::string format_frequency(double hz, int max_decimals = 4);

// Measured frequency in MHz with a fixed number of decimals: "897.4 MHz".
std::string format_mhz(double hz, int decimals = 1);

// A range in one unit: "905–925 MHz", "2.4–2.4835 GHz".
std::string format_frequency_range(double start_hz, double stop_hz);

}  // namespace echoline::core
