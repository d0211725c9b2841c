// Fuzz target for the station configuration loader (drivers/station_config.hpp). The input is
// written to a scratch file next to a copy of config/instruments/, so "instruments/<x>.jsonc"
// resolves to the project's real profiles. drivers::ConfigError
// naming the file is the expected outcome; anything else (crash, another exception type,
// a hang, e.g. in compiling serial_pattern) is a finding. Single-threaded.
#include <cstdint>
#include <string>

#include "drivers/station_config.hpp"
#include "tests/fuzz/config_fuzz_support.hpp"

namespace drivers = echoline::drivers;

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  echoline::fuzz::copy_project_profiles(ECHOLINE_SOURCE_DIR);
  const auto path = echoline::fuzz::write_scratch("fuzz-station.jsonc", echoline::fuzz::as_text(data, size));
  drivers::StationConfig config;
  const bool loaded = echoline::fuzz::expect_config_error_only(
      [&] { config = drivers::load_station_config(path); }, "");
  if (!loaded) return 0;
  FUZZ_CHECK(config.data_dir.is_absolute(), "data_dir not absolute after loading");
  for (const auto& i : config.instruments) FUZZ_CHECK(i.profile.is_absolute(), "profile path not absolute");
  FUZZ_CHECK(config.api.tcp_port >= 0 && config.api.tcp_port <= 65535, "tcp_port outside 0..65535");
  return 0;
}
