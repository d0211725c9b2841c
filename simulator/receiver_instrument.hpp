// The simulated swept spectrum analyzer: frequency axis, RBW/VBW, detector, averaging and
// max hold, markers and trace output (ASCii / REAL,32 / REAL,64 blocks). Each INIT computes
// the sweep from the World (source tone, connected DUT, bench physics) plus seeded noise.
// Pure, no I/O. Single-threaded (the server's io thread). Create with make_receiver_instrument.
#pragma once

#include <cstdint>
#include <string>
#include <utility>

#include <nlohmann/json_fwd.hpp>

namespace echoline::sim {

// The factory's settings (keys, units and defaults documented at make_receiver_instrument).
struct ReceiverConfig {
  std::string identity = "Echoline,SIM-SA,SA0001,1.0";
  std::pair<double, double> frequency_range_hz{9e3, 6e9};
  double noise_figure_db = 24;       // at 0 dB input attenuation; attenuation adds dB for dB
  double max_safe_input_dbm = 20;    // above it: overload error; a real analyzer is damaged
  double compression_dbm = 20;       // readings are limited to this level
  double reading_noise_db = 0.05;    // std dev of the multiplicative reading noise, dB
  std::uint64_t seed = 7;
};

// Throws std::invalid_argument naming the key.
ReceiverConfig receiver_config_from_json(const nlohmann::json& config);

}  // namespace echoline::sim
