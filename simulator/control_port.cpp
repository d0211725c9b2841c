#include "simulator/control_port.hpp"

#include <cmath>

#include <spdlog/spdlog.h>

#include "simulator/physics/dut_models.hpp"
#include "simulator/physics/truth.hpp"
#include "simulator/sim_config.hpp"

namespace echoline::sim {
namespace {

using nlohmann::json;

constexpr const char* kViaOffsetLine = "offset-line";

json fail(std::string message) { return json{{"ok", false}, {"error", std::move(message)}}; }

std::string string_field(const json& req, const char* key) {
  if (!req.contains(key) || !req[key].is_string()) return {};
  return req[key].get<std::string>();
}

json fault_to_json(const FaultSpec& spec) {
  json j{{"kind", std::string(to_string(spec.kind))}, {"probability", spec.probability}, {"seed", spec.seed}};
  if (spec.kind == FaultKind::slow_reply) j["delay_ms"] = spec.delay_ms;
  if (spec.kind == FaultKind::error_entry) {
    j["error_code"] = spec.error_code;
    j["error_message"] = spec.error_message;
  }
  if (spec.kind == FaultKind::wrong_identity) j["identity"] = spec.identity;
  return j;
}

}  // namespace

ControlService::ControlService(World& world, const Lot* lot, std::map<std::string, InstrumentHost*> hosts,
                               const SimClock& clock, std::string profile_name)
    : world_(world), lot_(lot), hosts_(std::move(hosts)), clock_(clock), profile_name_(std::move(profile_name)) {}

std::vector<Outgoing> ControlService::on_line(std::string_view line, const std::string& peer) {
  json reply = handle(line);
  const std::string text = reply.dump(-1, ' ', false, json::error_handler_t::replace);
  spdlog::info("control {} <- {}", peer, line);
  if (!reply.value("ok", false)) spdlog::warn("control {}: {}", peer, reply.value("error", std::string{}));
  return {Outgoing{text + "\n", 0, false}};
}

json ControlService::handle(std::string_view line) {
  ++requests_;
  json req;
  try {
    req = json::parse(line);
  } catch (const json::parse_error& e) {
    return fail(std::string("bad JSON: ") + e.what());
  }
  if (!req.is_object()) return fail("a request must be a JSON object with \"cmd\"");
  const std::string cmd = string_field(req, "cmd");
  try {
    if (cmd == "connect") return connect(req);
    if (cmd == "disconnect") {
      world_.connected.reset();
      world_.connected_name.clear();
      world_.via_offset_line = false;
      return json{{"ok", true}, {"connected", ""}};
    }
    if (cmd == "units") {
      if (lot_ == nullptr) return fail("units: no lot loaded (give --lot or \"lot\" in the config)");
      json units = json::array();
      for (const auto& u : lot_->units) units.push_back(u.serial);
      return json{{"ok", true}, {"lot", lot_->name}, {"units", units}};
    }
    if (cmd == "truth") return truth(req);
    if (cmd == "fault") return fault(req);
    if (cmd == "clear-faults") return clear_faults(req);
    if (cmd == "status") return status();
    if (cmd == "last-sweep") {
      // Ground truth for tests: per bin of the receiver's last sweep under a swept source, the
      // source frequency at which the bin saw the tone (null: not seen); empty after a CW sweep.
      json tone = json::array();
      for (double f : world_.last_sweep_tone_hz) tone.push_back(std::isfinite(f) ? json(f) : json(nullptr));
      return json{{"ok", true}, {"tone_hz", tone}};
    }
  } catch (const json::exception& e) {
    return fail(cmd + ": " + e.what());
  }
  if (cmd.empty()) return fail("missing \"cmd\" (a string)");
  return fail("unknown cmd \"" + cmd + "\" (connect, disconnect, units, truth, fault, clear-faults, status, last-sweep)");
}

const SimUnit* ControlService::unit_of(const json& req, std::string& error) const {
  const std::string serial = string_field(req, "unit");
  if (serial.empty()) {
    error = "\"unit\" must be a serial (string)";
    return nullptr;
  }
  if (lot_ == nullptr) {
    error = "no lot loaded (give --lot or \"lot\" in the config)";
    return nullptr;
  }
  const SimUnit* unit = lot_->find(serial);
  if (unit == nullptr) error = "unit \"" + serial + "\" is not in lot \"" + lot_->name + "\"";
  return unit;
}

json ControlService::connect(const json& req) {
  bool via_line = false;
  if (req.contains("via")) {
    if (string_field(req, "via") != kViaOffsetLine) return fail("connect: \"via\" must be \"offset-line\" (or left out)");
    if (!req.contains("unit")) return fail("connect: \"via\" goes with \"unit\": the offset line is in the DUT socket's arm");
    via_line = true;
  }
  if (req.contains("standard")) {
    const std::string standard = string_field(req, "standard");
    auto dut = make_standard(standard, world_.standards);
    if (!dut) return fail(std::string("connect: standard must be one of ") + standard_names());
    world_.connected = std::move(dut);
    world_.connected_name = standard;
  } else if (req.contains("unit")) {
    std::string error;
    const SimUnit* unit = unit_of(req, error);
    if (unit == nullptr) return fail("connect: " + error);
    world_.connected = make_unit_dut(*unit, lot_->seed);
    world_.connected_name = unit->serial;
  } else {
    return fail(std::string("connect: needs \"standard\" (") + standard_names() + ") or \"unit\" (a serial)");
  }
  world_.via_offset_line = via_line;
  spdlog::info("control: {} connected at the test port{}", world_.connected_name, via_line ? " behind the offset line" : "");
  json reply{{"ok", true}, {"connected", world_.connected_name}};
  if (via_line) reply["via"] = kViaOffsetLine;
  return reply;
}

json ControlService::truth(const json& req) {
  std::string error;
  const SimUnit* unit = unit_of(req, error);
  if (unit == nullptr) return fail("truth: " + error);
  json rl = json::array();
  if (req.contains("frequencies_hz")) {
    const json& fs = req["frequencies_hz"];
    if (!fs.is_array()) return fail("truth: \"frequencies_hz\" must be an array of numbers (Hz)");
    for (std::size_t i = 0; i < fs.size(); ++i) {
      if (!fs[i].is_number() || !(fs[i].get<double>() > 0)) {
        return fail("truth: frequencies_hz[" + std::to_string(i) + "] must be a number > 0 (Hz)");
      }
      const double v = true_return_loss_db(*unit, fs[i].get<double>());
      rl.push_back(std::isfinite(v) ? json(v) : json(nullptr));
    }
  }
  const UnitTruth t = unit_truth(*unit);
  return json{{"ok", true},
              {"unit", unit->serial},
              {"model", std::string(model_name(unit->model))},
              {"return_loss_db", rl},
              {"defect", unit->defect},
              {"element_length_mm", element_length_mm(*unit)},
              {"nominal_length_mm", nominal_length_mm(*unit)},
              {"f0_hz", t.f0_hz},
              {"depth_db", std::isfinite(t.depth_db) ? json(t.depth_db) : json(nullptr)}};
}

json ControlService::fault(const json& req) {
  const std::string role = string_field(req, "role");
  auto host = hosts_.find(role);
  if (host == hosts_.end()) return fail("fault: \"role\" must name a hosted instrument (source, receiver, switch)");
  json spec_json = req;
  spec_json.erase("cmd");
  spec_json.erase("role");
  auto spec = fault_from_json(spec_json);
  if (!spec.ok()) return fail("fault: " + spec.error().message);
  host->second->faults().arm(spec.value());
  spdlog::warn("control: fault {} armed on {} (probability {}, seed {})", to_string(spec->kind), role,
               spec->probability, spec->seed);
  return json{{"ok", true}, {"role", role}, {"fault", fault_to_json(spec.value())}};
}

json ControlService::clear_faults(const json& req) {
  const std::string role = string_field(req, "role");
  const std::string kind_name = string_field(req, "kind");
  std::optional<FaultKind> kind;
  if (!kind_name.empty()) {
    kind = parse_fault_kind(kind_name);
    if (!kind) return fail("clear-faults: unknown kind \"" + kind_name + "\" (one of " + fault_kind_names() + ")");
  }
  if (!role.empty() && hosts_.find(role) == hosts_.end()) return fail("clear-faults: no instrument with role \"" + role + "\"");
  for (auto& [name, host] : hosts_) {
    if (!role.empty() && name != role) continue;
    if (kind) {
      host->faults().disarm(*kind);
    } else {
      host->faults().clear();
    }
  }
  spdlog::info("control: faults cleared ({} {})", role.empty() ? "all roles" : role, kind_name.empty() ? "all kinds" : kind_name);
  return json{{"ok", true}};
}

json ControlService::status() const {
  json instruments = json::object();
  for (const auto& [name, host] : hosts_) {
    json faults = json::array();
    for (const auto& spec : host->faults().specs()) {
      json f = fault_to_json(spec);
      f["fired"] = host->faults().fired(spec.kind);
      faults.push_back(std::move(f));
    }
    const auto& c = host->counters();
    instruments[name] = json{{"identity", host->instrument().identity()},
                             {"messages", c.messages},
                             {"replies", c.replies},
                             {"faults_fired", c.faults},
                             {"connections", c.connections},
                             {"faults", faults}};
  }
  return json{{"ok", true},
              {"connected", world_.connected_name},
              {"via", world_.via_offset_line ? kViaOffsetLine : ""},
              {"lot", lot_ != nullptr ? lot_->name : std::string{}},
              {"profile", profile_name_},
              {"sim_time_s", clock_.now()},
              {"sweeps", world_.sweep_counter},
              {"control_requests", requests_},
              {"instruments", instruments}};
}

}  // namespace echoline::sim
