#include "daemon/client/capability.hpp"

#include <optional>

#include "daemon/core/cal_kit_loader.hpp"
#include "daemon/core/station_capability.hpp"
#include "drivers/config_error.hpp"
#include "drivers/profile.hpp"

namespace echoline::client {

namespace {

struct Profiles {
  drivers::Profile source, receiver;
};

Profiles load_profiles(const drivers::StationConfig& config) {
  const auto* src = config.find_role("source");
  const auto* rcv = config.find_role("receiver");
  if (src == nullptr || rcv == nullptr) {
    throw drivers::ConfigError(config.file, 0, "/instruments", "a source and a receiver are required");
  }
  return {drivers::load_profile(src->profile), drivers::load_profile(rcv->profile)};
}

}  // namespace

Result<core::FastCapturePlan> fast_capture_plan(const drivers::StationConfig& config, const core::Recipe& recipe) {
  const Profiles p = load_profiles(config);
  return core::plan_fast_capture(recipe, config.fixture, p.source, p.receiver);
}

core::StationCapability station_capability(const drivers::StationConfig& config, const core::Recipe& recipe) {
  const Profiles profiles = load_profiles(config);
  const drivers::Profile& sp = profiles.source;
  const drivers::Profile& rp = profiles.receiver;
  std::optional<drivers::Profile> switch_profile;
  if (const auto* sw = config.find_role("switch")) switch_profile = drivers::load_profile(sw->profile);
  const drivers::Profile* swp = switch_profile ? &*switch_profile : nullptr;
  if (config.calibration_kit.empty()) return core::station_capability(config.fixture, sp, rp, recipe, nullptr, swp);
  const core::CalKit kit = core::load_cal_kit(config.calibration_kit);
  return core::station_capability(config.fixture, sp, rp, recipe, &kit, swp);
}

}  // namespace echoline::client
