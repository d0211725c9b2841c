// Helpers for the configuration-loader fuzz targets: a private scratch file for loaders that read
// from disk, and the one rule they share — drivers::ConfigError is the expected outcome for bad
// input; any other exception is a finding. Single-threaded (one input at a time per process).
#pragma once

#include <cstdio>
#include <cstdlib>
#include <exception>
#include <filesystem>
#include <fstream>
#include <string>
#include <string_view>
#include <typeinfo>

#include <unistd.h>

#include "drivers/config_error.hpp"
#include "tests/fuzz/fuzz_check.hpp"

namespace echoline::fuzz {

// A folder of our own under $TMPDIR (or /tmp), made once per process and removed at exit.
inline const std::filesystem::path& scratch_dir() {
  static const std::filesystem::path dir = [] {
    const char* base = std::getenv("TMPDIR");
    std::string templ = std::string(base && *base ? base : "/tmp") + "/echoline-fuzz-XXXXXX";
    if (::mkdtemp(templ.data()) == nullptr) invariant_broken("cannot make a scratch folder", __FILE__, __LINE__);
    std::atexit([] {
      std::error_code ec;
      std::filesystem::remove_all(scratch_dir(), ec);
    });
    return std::filesystem::path(templ);
  }();
  return dir;
}

// Writes `bytes` to <scratch>/<name> (replacing it) and returns the path.
inline std::filesystem::path write_scratch(std::string_view name, std::string_view bytes) {
  const auto path = scratch_dir() / std::string(name);
  std::ofstream out(path, std::ios::binary | std::ios::trunc);
  out.write(bytes.data(), static_cast<std::streamsize>(bytes.size()));
  out.close();
  if (!out) invariant_broken("cannot write the scratch file", __FILE__, __LINE__);
  return path;
}

// Runs `load`; a ConfigError must say what is wrong and name `expected_file` (unless it is "":
// a station file may point at a profile whose own errors name the profile). Any other
// exception type aborts with its type and message (a finding). Returns true when it loaded.
template <typename F>
bool expect_config_error_only(F&& load, std::string_view expected_file) {
  try {
    load();
    return true;
  } catch (const drivers::ConfigError& e) {
    FUZZ_CHECK(!e.message.empty(), "ConfigError without a message");
    FUZZ_CHECK(expected_file.empty() || e.file.find(expected_file) != std::string::npos,
               "ConfigError names another file: " + e.file + " (" + e.what() + ")");
    return false;
  } catch (const std::exception& e) {
    invariant_broken(std::string("loader threw ") + typeid(e).name() + " instead of ConfigError: " + e.what(),
                     __FILE__, __LINE__);
  } catch (...) {
    invariant_broken("loader threw a non-std exception", __FILE__, __LINE__);
  }
}

// Copies the project's config/instruments/*.jsonc into <scratch>/instruments/ once, so station
// files that name "instruments/<profile>.jsonc" resolve to real profiles.
inline void copy_project_profiles(const std::filesystem::path& source_dir) {
  static const bool done = [&] {
    std::error_code ec;
    std::filesystem::copy(source_dir / "config" / "instruments", scratch_dir() / "instruments",
                          std::filesystem::copy_options::recursive | std::filesystem::copy_options::overwrite_existing, ec);
    return true;
  }();
  (void)done;
}

}  // namespace echoline::fuzz
