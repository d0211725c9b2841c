// Invariant checks shared by the fuzz targets: a failed check prints what broke and aborts, so
// libFuzzer records the input as a crash and the replay driver fails its ctest. Active in every
// build type (unlike assert). Single-threaded: the targets run one input at a time.
#pragma once

#include <cstdio>
#include <cstdlib>
#include <string>
#include <string_view>

namespace echoline::fuzz {

// Prints "fuzz invariant broken: <what> (<file>:<line>)" and aborts.
[[noreturn]] inline void invariant_broken(std::string_view what, const char* file, int line) {
  std::fprintf(stderr, "fuzz invariant broken: %.*s (%s:%d)\n", static_cast<int>(what.size()), what.data(), file, line);
  std::fflush(stderr);
  std::abort();
}

// The fuzz input as text (bytes unchanged, may hold NULs and invalid UTF-8).
inline std::string_view as_text(const unsigned char* data, std::size_t size) {
  return {reinterpret_cast<const char*>(data), size};
}

}  // namespace echoline::fuzz

#define FUZZ_CHECK(cond, what)                                                            \
  do {                                                                                     \
    if (!(cond)) ::echoline::fuzz::invariant_broken(std::string(what), __FILE__, __LINE__); \
  } while (0)
