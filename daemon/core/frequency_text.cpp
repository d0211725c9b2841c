// Frequency text in and out (frequency_text.hpp). std::from_chars and fmt: no locale.
#include "daemon/core/frequency_text.hpp"

#include <algorithm>
#include <charconv>
#include <cmath>
#include <string>

#include <fmt/format.h>

namespace echoline::core {
namespace {

bool is_space(char c) { return c == ' ' || c == '\t'; }

std::string lower(std::string_view s) {
  std::string out(s);
  for (char& c : out) {
    if (c >= 'A' && c <= 'Z') c = static_cast<char>(c - 'A' + 'a');
  }
  return out;
}

Error bad(std::string_view text, std::string_view what) {
  return make_error(ErrorKind::invalid_argument,
                    fmt::format("frequency \"{}\": {} (write a number in Hz, or a number with Hz, kHz, MHz or GHz, "
                                "e.g. \"902 MHz\")",
                                text, what));
}

// Trailing zeros (and a trailing point) removed from fixed notation.
std::string trim_number(double value, int decimals) {
  std::string s = fmt::format("{:.{}f}", value, decimals);
  if (s.find('.') != std::string::npos) {
    while (!s.empty() && s.back() == '0') s.pop_back();
    if (!s.empty() && s.back() == '.') s.pop_back();
  }
  if (s == "-0") s = "0";
  return s;
}

struct Unit {
  double scale;
  const char* name;
};

Unit unit_for(double hz) {
  double a = std::fabs(hz);
  if (a >= 1e9) return {1e9, "GHz"};
  if (a >= 1e6) return {1e6, "MHz"};
  if (a >= 1e3) return {1e3, "kHz"};
  return {1.0, "Hz"};
}

}  // namespace

Result<FrequencyText> parse_frequency_text(std::string_view text) {
  std::size_t b = 0, e = text.size();
  while (b < e && is_space(text[b])) ++b;
  while (e > b && is_space(text[e - 1])) --e;
  std::string_view t = text.substr(b, e - b);
  if (t.empty()) return bad(text, "empty");
  std::string_view num = t;
  if (!num.empty() && num.front() == '+') num.remove_prefix(1);  // from_chars rejects '+'
  double value = 0;
  auto [ptr, ec] = std::from_chars(num.data(), num.data() + num.size(), value);
  if (ec == std::errc::result_out_of_range) return bad(text, "number out of range");
  if (ec != std::errc() || ptr == num.data()) return bad(text, "does not start with a number");
  std::string_view rest(ptr, static_cast<std::size_t>(num.data() + num.size() - ptr));
  while (!rest.empty() && is_space(rest.front())) rest.remove_prefix(1);
  if (!std::isfinite(value)) return bad(text, "not a finite number");
  double scale = 1.0;
  if (!rest.empty()) {
    const std::string u = lower(rest);
    // SI prefixes: a lower-case m is milli, so only an upper-case M is mega (config/README.md).
    if (u == "mhz" && rest.front() == 'm') {
      std::string_view number_text = t.substr(0, t.size() - rest.size());
      while (!number_text.empty() && is_space(number_text.back())) number_text.remove_suffix(1);
      return make_error(ErrorKind::invalid_argument,
                        fmt::format("frequency \"{}\": mHz is millihertz; write MHz for megahertz (\"{} MHz\")", text,
                                    number_text));
    }
    if (u == "hz") scale = 1.0;
    else if (u == "khz") scale = 1e3;
    else if (u == "mhz") scale = 1e6;
    else if (u == "ghz") scale = 1e9;
    else return bad(text, fmt::format("unknown unit \"{}\"", rest));
  }
  return FrequencyText{value * scale, !rest.empty()};
}

Result<double> parse_frequency(std::string_view text) {
  auto parsed = parse_frequency_text(text);
  if (!parsed) return parsed.error();
  return parsed->hz;
}

std::string format_frequency(double hz, int max_decimals) {
  Unit u = unit_for(hz);
  return trim_number(hz / u.scale, max_decimals) + " " + u.name;
}

std::string format_mhz(double hz, int decimals) { return fmt::format("{:.{}f} MHz", hz / 1e6, decimals); }

std::string format_frequency_range(double start_hz, double stop_hz) {
  Unit u = unit_for(std::max(std::fabs(start_hz), std::fabs(stop_hz)));
  return trim_number(start_hz / u.scale, 4) + "\u2013" + trim_number(stop_hz / u.scale, 4) + " " + u.name;
}

}  // namespace echoline::core
