// Serial numbers are untrusted input (barcode scanners, API clients): this module decides which
// ones the station accepts and turns an accepted serial into a safe file-name stem.
// Pure functions; thread-safe.
#pragma once

#include <string>
#include <string_view>

#include "drivers/result.hpp"

namespace echoline::store {

// The station's default pattern (StationConfig::serial_pattern has the same default).
inline constexpr std::string_view kDefaultSerialPattern = "^[A-Za-z0-9._-]{1,64}$";

// Longest serial accepted whatever the pattern says, in bytes.
inline constexpr std::size_t kMaxSerialBytes = 128;

// Accepts `serial` when it passes the fixed rules AND matches `pattern` (ECMAScript std::regex,
// whole string). Fixed rules, checked first, whatever the pattern: not empty, at most
// kMaxSerialBytes bytes, valid UTF-8, no control characters, no '/', '\\', quotes ('"', '\'',
// '`'), ';', whitespace, not "." or "..".
// Errors: ErrorKind::invalid_argument, message names the serial (escaped), the offending
// character and its 1-based position, e.g.
//   "serial 'ab/cd' rejected: character '/' at position 3 is not allowed (allowed: A–Z a–z 0–9 . _ -)"
// ErrorKind::config when `pattern` is not a valid regular expression.
Status validate_serial(std::string_view serial, std::string_view pattern = kDefaultSerialPattern);

// A file-name stem for exports: keeps [A-Za-z0-9._-], replaces anything else by '_', never
// empty, never starts with '.', at most 64 characters. When anything was replaced or cut, an
// 8-hex-digit hash of the original bytes is appended so distinct serials stay distinct.
std::string safe_file_stem(std::string_view serial);

// For messages: the serial with control / non-ASCII bytes shown as \xNN, cut at 80 characters.
std::string printable_serial(std::string_view serial);

}  // namespace echoline::store
