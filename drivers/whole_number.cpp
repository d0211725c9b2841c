// Strict whole-number parsing for command-line options (whole_number.hpp).
#include "drivers/whole_number.hpp"

#include <charconv>

#include <fmt/format.h>

namespace echoline::drivers {

std::optional<long long> parse_whole_number(std::string_view text, long long min, long long max) {
  if (text.empty()) return std::nullopt;
  long long value = 0;
  const auto [end, ec] = std::from_chars(text.data(), text.data() + text.size(), value);
  if (ec != std::errc() || end != text.data() + text.size()) return std::nullopt;   // also out of long long range
  if (value < min || value > max) return std::nullopt;
  return value;
}

std::string whole_number_error(std::string_view option, std::string_view text, long long min, long long max,
                               std::string_view meaning) {
  std::string message = fmt::format("{} {}: expected a whole number from {} to {}", option,
                                    text.empty() ? std::string_view("\"\"") : text, min, max);
  if (!meaning.empty()) message += fmt::format(" ({})", meaning);
  return message;
}

}  // namespace echoline::drivers
