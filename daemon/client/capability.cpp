#include "daemon/client/capability.hpp"

#include "daemon/core/cal_kit_loader.hpp"
#include "daemon/core/station_capability.hpp"
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
  if (config.calibration_kit.empty()) return core::station_capability(config.fixture, sp, rp, recipe);
  const core::CalKit kit = core::load_cal_kit(config.calibration_kit);
  return core::station_capability(config.fixture, sp, rp, recipe, &kit);
}

}  // namespace echoline::client
