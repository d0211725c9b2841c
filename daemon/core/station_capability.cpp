// Station capability from fixture figures and profiles.
#include "daemon/core/station_capability.hpp"

#include <algorithm>

#include "daemon/core/rf_math.hpp"

namespace echoline::core {

StationCapability station_capability(const drivers::FixtureConfig& fixture, const drivers::Profile& source,
                                     const drivers::Profile& receiver, const Recipe& recipe, const CalKit* kit) {
  StationCapability c;
  c.directivity_db = fixture.nominal_directivity_db;
  c.source_match_db = fixture.source_match_db;
  c.coupling_db = fixture.coupling_db;
  c.mainline_loss_db = fixture.mainline_loss_db;
  c.cable_loss_db = fixture.cable_loss_db;
  // The RBW the readings are taken with (fast capture has its own), and the input attenuator:
  // the displayed noise level referred to the input rises dB for dB with it (spectrum-analyzer
  // practice, from memory). "auto" (-1) counts as 0.
  const double rbw_hz = recipe.mode == SweepMode::fast_capture ? recipe.fast_capture.rbw_hz : recipe.receiver.rbw_hz;
  c.noise_floor_dbm = thermal_noise_floor_dbm(rbw_hz, receiver.noise_figure_db) + std::max(0.0, recipe.receiver.attenuation_db);
  c.receiver_max_safe_input_dbm = receiver.max_safe_input_dbm;
  c.source_min_hz = source.min_frequency_hz;
  c.source_max_hz = source.max_frequency_hz;
  c.receiver_min_hz = receiver.min_frequency_hz;
  c.receiver_max_hz = receiver.max_frequency_hz;
  c.source_max_power_dbm = source.max_power_dbm;
  if (kit) c.kit = *kit;
  c.test_port_delay_s = fixture.test_port_delay_ns * 1e-9;
  for (const auto& spec : drivers::operation_table()) {
    if (spec.role == "source" && !source.has(spec.name)) c.source_lacks.emplace(spec.name);
    if (spec.role == "receiver" && !receiver.has(spec.name)) c.receiver_lacks.emplace(spec.name);
  }
  c.source_profile = source.name;
  c.receiver_profile = receiver.name;
  return c;
}

}  // namespace echoline::core
