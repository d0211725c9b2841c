// Station capability from fixture figures and profiles.
#include "daemon/core/station_capability.hpp"

#include <algorithm>
#include <string>
#include <vector>

#include <fmt/format.h>

#include "daemon/core/offset_pair_check.hpp"
#include "daemon/core/rf_math.hpp"

namespace echoline::core {

FastCaptureInstruments fast_capture_instruments(const drivers::Profile& source, const drivers::Profile& receiver) {
  FastCaptureInstruments in;
  const drivers::SweepLimits& s = source.sweep;
  const drivers::SweepLimits& r = receiver.sweep;
  if (s.max_time_s > 0) {
    in.source_min_sweep_s = s.min_time_s;
    in.source_max_sweep_s = s.max_time_s;
  }
  in.source_retrace_s = s.retrace_s;
  if (r.max_time_s > 0) {
    in.receiver_min_sweep_s = r.min_time_s;
    in.receiver_max_sweep_s = r.max_time_s;
  }
  if (r.rearm_s > 0) in.receiver_rearm_s = r.rearm_s;
  if (r.max_points > 0) in.receiver_max_points = r.max_points;
  in.rbw_steps_hz = r.rbw_steps_hz.empty() ? rbw_series_1_3(10, 3e6) : r.rbw_steps_hz;
  in.noise_figure_db = receiver.noise_figure_db;
  return in;
}

std::string start_pulse_problem(const drivers::FixtureConfig& fixture, const drivers::Profile& source,
                                const drivers::Profile& receiver) {
  if (!fixture.start_pulse_cable) return "";
  std::vector<std::string> missing;
  if (source.sweep.start_pulse_uncertainty_s < 0) missing.push_back(fmt::format("source profile {} gives no sweep.start_pulse_uncertainty_s", source.name));
  if (receiver.sweep.trigger_uncertainty_s < 0) missing.push_back(fmt::format("receiver profile {} gives no sweep.trigger_latency_s/trigger_uncertainty_s", receiver.name));
  if (source.sweep.time_accuracy_ppm < 0) missing.push_back(fmt::format("source profile {} gives no sweep.time_accuracy_ppm", source.name));
  if (receiver.sweep.time_accuracy_ppm < 0) missing.push_back(fmt::format("receiver profile {} gives no sweep.time_accuracy_ppm", receiver.name));
  for (std::string_view op : {"trigger_external", "trigger_immediate", "set_trigger_delay", "abort"}) {
    if (!receiver.has(op)) missing.push_back(fmt::format("receiver profile {} has no operation {}", receiver.name, op));
  }
  if (missing.empty()) return "";
  std::string out = "fixture.start_pulse_cable is set but the cable cannot be used: ";
  for (std::size_t i = 0; i < missing.size(); ++i) out += (i ? "; " : "") + missing[i];
  return out + "; fast capture runs untriggered, each reading up to half a bin off its frequency";
}

namespace {

StationCapability nominal(const drivers::FixtureConfig& fixture) {
  StationCapability c;
  c.directivity_db = fixture.nominal_directivity_db;
  c.source_match_db = fixture.source_match_db;
  c.coupling_db = fixture.coupling_db;
  c.mainline_loss_db = fixture.mainline_loss_db;
  c.cable_loss_db = fixture.cable_loss_db;
  return c;
}

}  // namespace

Result<FastCapturePlan> plan_fast_capture(const Recipe& recipe, const drivers::FixtureConfig& fixture,
                                          const drivers::Profile& source, const drivers::Profile& receiver) {
  const StationCapability c = nominal(fixture);
  const double load_dbm = expected_reflection_dbm(recipe.source.power_dbm, c) - c.directivity_db;
  FastCaptureInstruments in = fast_capture_instruments(source, receiver);
  if (fixture.start_pulse_cable && start_pulse_problem(fixture, source, receiver).empty()) {
    in.start_pulse_trigger = true;
    in.trigger_latency_s = receiver.sweep.trigger_latency_s;
    in.trigger_uncertainty_s = receiver.sweep.trigger_uncertainty_s + source.sweep.start_pulse_uncertainty_s;
    in.source_time_accuracy = source.sweep.time_accuracy_ppm * 1e-6;
    in.receiver_time_accuracy = receiver.sweep.time_accuracy_ppm * 1e-6;
  }
  return plan_fast_capture(recipe, in, load_dbm);
}

StationCapability station_capability(const drivers::FixtureConfig& fixture, const drivers::Profile& source,
                                     const drivers::Profile& receiver, const Recipe& recipe, const CalKit* kit,
                                     const drivers::Profile* switch_profile) {
  StationCapability c = nominal(fixture);
  // The RBW the readings are taken with (fast capture: the planned one), and the input
  // attenuator: the displayed noise level referred to the input rises dB for dB with it
  // (spectrum-analyzer practice, from memory). "auto" (-1) counts as 0.
  double rbw_hz = recipe.receiver.rbw_hz;
  if (recipe.mode == SweepMode::fast_capture) {
    auto plan = plan_fast_capture(recipe, fixture, source, receiver);
    if (plan) {
      rbw_hz = plan->rbw_hz;
      c.frequency_offset_hz = plan->frequency_offset_hz;
    } else {
      c.fast_capture_problem = plan.error().message;
    }
    c.start_pulse_problem = start_pulse_problem(fixture, source, receiver);
  }
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
  if (switch_profile) {
    c.has_switch = true;
    for (const auto& [name, token] : switch_profile->positions) c.switch_positions.insert(name);
    c.switch_profile = switch_profile->name;
  }
  // No switch arm reaches the unit through the line: the operator fits it for each unit. Its
  // near-end connection is then made anew each time, so its repeatability at the coverage factor
  // joins the line's match (MEASUREMENT.md §12): everything downstream, the calibration's copy of
  // the line too, uses the widened figure.
  if (recipe.offset_pair && c.kit.offset_line && c.switch_positions.count(kOffsetArm) == 0) {
    c.offset_line_by_hand = true;
    c.kit_line_match = c.kit.offset_line->match;
    c.kit.offset_line->match += recipe.coverage_factor * c.kit.connection_repeatability;
  }
  return c;
}

}  // namespace echoline::core
