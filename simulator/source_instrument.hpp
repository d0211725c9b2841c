// The simulated signal generator: CW or a free-running linear frequency sweep (STARt, STOP,
// SWEep:TIME), level and output state within configured ranges; every change is written to the
// World with the time it settles. Pure, no I/O.
// Single-threaded (the server's io thread). Create with make_source_instrument (instrument.hpp).
#pragma once

#include <cstdint>
#include <string>
#include <utility>

#include <nlohmann/json_fwd.hpp>

namespace echoline::sim {

// The factory's settings (keys and defaults documented at make_source_instrument).
struct SourceConfig {
  std::string identity = "Echoline,SIM-SRC,SRC0001,1.0";
  std::pair<double, double> frequency_range_hz{9e3, 6e9};
  std::pair<double, double> power_range_dbm{-110, 20};
  double settle_s = 0.002;
  double level_accuracy_db = 0.3;   // std dev of the fixed level offset; flatness is 1/10 of it
  std::uint64_t seed = 7;
};

// Throws std::invalid_argument naming the key.
SourceConfig source_config_from_json(const nlohmann::json& config);

}  // namespace echoline::sim
