// Serial validation: fixed rules first (whatever the station pattern), then the station pattern.
#include "daemon/store/serial.hpp"

#include <fmt/format.h>

#include <cstdint>
#include <regex>

namespace echoline::store {
namespace {

// Length in bytes of the UTF-8 sequence starting at s[i], or 0 when it is not valid UTF-8
// (overlong forms, surrogates and code points above U+10FFFF rejected, RFC 3629 §4).
std::size_t utf8_sequence_length(std::string_view s, std::size_t i) {
  const auto b0 = static_cast<unsigned char>(s[i]);
  if (b0 < 0x80) return 1;
  std::size_t n = 0;
  std::uint32_t cp = 0;
  if (b0 >= 0xC2 && b0 <= 0xDF) { n = 2; cp = b0 & 0x1F; }
  else if (b0 >= 0xE0 && b0 <= 0xEF) { n = 3; cp = b0 & 0x0F; }
  else if (b0 >= 0xF0 && b0 <= 0xF4) { n = 4; cp = b0 & 0x07; }
  else return 0;
  if (i + n > s.size()) return 0;
  for (std::size_t k = 1; k < n; ++k) {
    const auto b = static_cast<unsigned char>(s[i + k]);
    if ((b & 0xC0) != 0x80) return 0;
    cp = (cp << 6) | (b & 0x3F);
  }
  if ((n == 3 && cp < 0x800) || (n == 4 && cp < 0x10000) || cp > 0x10FFFF) return 0;
  if (cp >= 0xD800 && cp <= 0xDFFF) return 0;
  return n;
}

std::string describe_char(std::string_view ch) {
  const auto b = static_cast<unsigned char>(ch[0]);
  if (ch.size() == 1 && (b < 0x20 || b == 0x7F)) return fmt::format("control character 0x{:02X}", b);
  if (ch.size() == 1 && b == ' ') return "space";
  return fmt::format("character '{}'", ch);
}

Error rejected(std::string_view serial, const std::string& what) {
  return make_error(ErrorKind::invalid_argument,
                    fmt::format("serial '{}' rejected: {}", printable_serial(serial), what));
}

bool default_allowed(unsigned char c) {
  return (c >= 'A' && c <= 'Z') || (c >= 'a' && c <= 'z') || (c >= '0' && c <= '9') || c == '.' ||
         c == '_' || c == '-';
}

constexpr std::string_view kDefaultAllowed = "(allowed: A–Z a–z 0–9 . _ -)";

}  // namespace

std::string printable_serial(std::string_view serial) {
  std::string out;
  std::size_t shown = 0;
  for (std::size_t i = 0; i < serial.size() && shown < 80; ++shown) {
    const auto b = static_cast<unsigned char>(serial[i]);
    const std::size_t n = utf8_sequence_length(serial, i);
    if (n == 1 && b >= 0x20 && b != 0x7F && b != '\\') {
      out.push_back(static_cast<char>(b));
    } else if (n == 1 && b == '\\') {
      out += "\\\\";
    } else if (n > 1) {
      out.append(serial.substr(i, n));
    } else {
      out += fmt::format("\\x{:02X}", b);
    }
    i += n == 0 ? 1 : n;
    if (shown + 1 == 80 && i < serial.size()) out += "…";
  }
  return out;
}

Status validate_serial(std::string_view serial, std::string_view pattern) {
  if (serial.empty()) return make_error(ErrorKind::invalid_argument, "serial rejected: it is empty");
  if (serial.size() > kMaxSerialBytes) {
    return rejected(serial, fmt::format("it is {} bytes long (at most {} allowed)", serial.size(), kMaxSerialBytes));
  }
  if (serial == "." || serial == "..") return rejected(serial, "'.' and '..' are not serials");
  std::size_t position = 0;  // 1-based character position
  for (std::size_t i = 0; i < serial.size();) {
    ++position;
    const std::size_t n = utf8_sequence_length(serial, i);
    if (n == 0) {
      return rejected(serial, fmt::format("byte 0x{:02X} at position {} is not valid UTF-8",
                                          static_cast<unsigned char>(serial[i]), position));
    }
    const std::string_view ch = serial.substr(i, n);
    const auto b = static_cast<unsigned char>(ch[0]);
    const bool forbidden = n == 1 && (b < 0x20 || b == 0x7F || b == ' ' || b == '/' || b == '\\' ||
                                      b == '"' || b == '\'' || b == '`' || b == ';');
    if (forbidden) {
      return rejected(serial, fmt::format("{} at position {} is not allowed{}", describe_char(ch), position,
                                          pattern == kDefaultSerialPattern ? std::string(" ") + std::string(kDefaultAllowed) : ""));
    }
    i += n;
  }
  std::regex re;
  try {
    re = std::regex(std::string(pattern), std::regex::ECMAScript);
  } catch (const std::regex_error& e) {
    return make_error(ErrorKind::config, fmt::format("serial pattern '{}' is not a valid regular expression: {}", pattern, e.what()));
  }
  if (std::regex_match(serial.begin(), serial.end(), re)) return Status::success();
  if (pattern == kDefaultSerialPattern) {
    position = 0;
    for (std::size_t i = 0; i < serial.size();) {
      ++position;
      const std::size_t n = utf8_sequence_length(serial, i);
      if (n != 1 || !default_allowed(static_cast<unsigned char>(serial[i]))) {
        return rejected(serial, fmt::format("{} at position {} is not allowed {}", describe_char(serial.substr(i, n)),
                                            position, kDefaultAllowed));
      }
      i += n;
    }
    return rejected(serial, fmt::format("it is {} characters long (at most 64 allowed)", position));
  }
  return rejected(serial, fmt::format("it does not match the station's serial pattern '{}'", pattern));
}

std::string safe_file_stem(std::string_view serial) {
  std::string out;
  for (const char c : serial) out.push_back(default_allowed(static_cast<unsigned char>(c)) ? c : '_');
  if (out.empty()) out = "_";
  if (out[0] == '.') out[0] = '_';
  if (out.size() > 64 || out != serial) {
    // Replacements or cuts can make two serials collide: add a hash of the original bytes (FNV-1a 32).
    std::uint32_t h = 2166136261u;
    for (const char c : serial) { h ^= static_cast<unsigned char>(c); h *= 16777619u; }
    if (out.size() > 55) out.resize(55);
    out += fmt::format("-{:08x}", h);
  }
  return out;
}

}  // namespace echoline::store
