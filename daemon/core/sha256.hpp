// SHA-256 (FIPS 180-4) of a byte string, for recipe content hashes.
// Pure; thread-safe.
#pragma once

#include <string>
#include <string_view>

namespace echoline::core {

// Lower-case hex digest (64 characters) of `bytes`.
std::string sha256_hex(std::string_view bytes);

}  // namespace echoline::core
