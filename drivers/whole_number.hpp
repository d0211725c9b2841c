// Whole numbers typed by people on command lines: the whole text must be one decimal integer
// (an optional '-', digits, nothing else) inside a stated range. Every binary's numeric options
// go through it, so "70000", "-1" and "12abc" are refused the same way everywhere.
// Pure functions; thread-safe.
#pragma once

#include <optional>
#include <string>
#include <string_view>

namespace echoline::drivers {

// The value of `text`, or nullopt when it is not one decimal integer in [min, max].
std::optional<long long> parse_whole_number(std::string_view text, long long min, long long max);

// "<option> <text>: expected a whole number from <min> to <max>[ (<meaning>)]", for usage errors.
std::string whole_number_error(std::string_view option, std::string_view text, long long min, long long max,
                               std::string_view meaning = {});

}  // namespace echoline::drivers
