// Wall-clock helpers for run records: UTC ISO 8601 text, its inverse, and run identifiers.
// Reads the system clock (edge); thread-safe.
#pragma once

#include <optional>
#include <string>
#include <string_view>

namespace echoline::service {

double unix_now_s();                                   // seconds since 1970, UTC
std::string utc_iso8601(double unix_s);                // "2026-12-01T22:15:00.123Z"
std::optional<double> parse_utc_iso8601(std::string_view text);   // inverse; nullopt when malformed
std::string compact_utc(double unix_s);                // "20261201T221500Z" for identifiers

}  // namespace echoline::service
