#include "daemon/client/capability.hpp"

#include "daemon/core/rf_math.hpp"
#include "drivers/config_error.hpp"
#include "drivers/profile.hpp"

namespace echoline::client {

core::StationCapability station_capability(const drivers::StationConfig& config, const core::Recipe& recipe) {
  const auto* src = config.find_role("source");
  const auto* rcv = config.find_role("receiver");
  if (src == nullptr || rcv == nullptr) {
    throw drivers::ConfigError(config.file, 0, "/instruments", "a source and a receiver are required");
  }
  const drivers::Profile sp = drivers::load_profile(src->profile);
  const drivers::Profile rp = drivers::load_profile(rcv->profile);
  core::StationCapability c;
  const auto& fx = config.fixture;
  c.directivity_db = fx.nominal_directivity_db;
  c.source_match_db = fx.source_match_db;
  c.coupling_db = fx.coupling_db;
  c.mainline_loss_db = fx.mainline_loss_db;
  c.cable_loss_db = fx.cable_loss_db;
  c.noise_floor_dbm = core::thermal_noise_floor_dbm(recipe.receiver.rbw_hz, rp.noise_figure_db);
  c.receiver_max_safe_input_dbm = rp.max_safe_input_dbm;
  c.source_min_hz = sp.min_frequency_hz;
  c.source_max_hz = sp.max_frequency_hz;
  c.receiver_min_hz = rp.min_frequency_hz;
  c.receiver_max_hz = rp.max_frequency_hz;
  c.source_max_power_dbm = sp.max_power_dbm;
  return c;
}

}  // namespace echoline::client
