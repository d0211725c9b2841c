#include "simulator/sim_config.hpp"

#include <algorithm>

#include "drivers/config_error.hpp"
#include "drivers/jsonc.hpp"

namespace echoline::sim {
namespace {

using drivers::JsoncDocument;
using drivers::JsonPointer;


void read_endpoints(const JsoncDocument& doc, const JsonPointer& at, EndpointConfig& out, bool allow_pty) {
  doc.require_object(at);
  doc.check_keys(at, allow_pty ? std::vector<std::string>{"tcp", "pty"} : std::vector<std::string>{"tcp"});
  if (doc.has(at / "tcp")) {
    const JsonPointer tcp = at / "tcp";
    doc.require_object(tcp);
    doc.check_keys(tcp, {"host", "port"});
    out.tcp = true;
    out.host = doc.string_or(tcp / "host", "127.0.0.1");
    out.port = static_cast<int>(doc.integer_or(tcp / "port", 0));
    if (out.port < 0 || out.port > 65535) doc.fail(tcp / "port", "port must be 0 (any free port) .. 65535");
  }
  if (allow_pty && doc.has(at / "pty")) {
    const JsonPointer pty = at / "pty";
    doc.require_object(pty);
    doc.check_keys(pty, {"link", "baud"});
    out.pty = true;
    out.link = doc.string_or(pty / "link", "");
    out.baud = static_cast<int>(doc.integer_or(pty / "baud", 115200));
    if (out.baud <= 0) doc.fail(pty / "baud", "baud must be > 0");
  }
  if (!out.tcp && !out.pty) doc.fail(at, allow_pty ? "needs \"tcp\" and/or \"pty\"" : "needs \"tcp\"");
}

BenchParams read_bench(const JsoncDocument& doc, const JsonPointer& at) {
  BenchParams b;
  if (!doc.has(at)) return b;
  doc.require_object(at);
  doc.check_keys(at, {"coupling_db", "mainline_loss_db", "directivity_db", "directivity_delay_ns",
                      "cable_delay_ns", "cable_loss_db", "source_match_db", "reference_impedance_ohm"});
  b.coupling_db = doc.number_in(at / "coupling_db", b.coupling_db, 0, 60, "dB");
  b.mainline_loss_db = doc.number_in(at / "mainline_loss_db", b.mainline_loss_db, 0, 20, "dB");
  b.directivity_db = doc.number_in(at / "directivity_db", b.directivity_db, 0, 80, "dB");
  b.directivity_delay_ns = doc.number_in(at / "directivity_delay_ns", b.directivity_delay_ns, 0, 1000, "ns");
  b.cable_delay_ns = doc.number_in(at / "cable_delay_ns", b.cable_delay_ns, 0, 1000, "ns");
  b.cable_loss_db = doc.number_in(at / "cable_loss_db", b.cable_loss_db, 0, 20, "dB");
  b.source_match_db = doc.number_in(at / "source_match_db", b.source_match_db, 0, 80, "dB");
  b.reference_impedance_ohm = doc.number_in(at / "reference_impedance_ohm", b.reference_impedance_ohm, 1, 1000, "ohm");
  return b;
}

// "standards"/"mismatch_a" or "mismatch_b": a mismatch standard's true value, every key optional.
MismatchParams read_mismatch(const JsoncDocument& doc, const JsonPointer& at, MismatchParams m) {
  if (!doc.has(at)) return m;
  doc.require_object(at);
  doc.check_keys(at, {"magnitude", "phase_deg", "offset_delay_ps"});
  m.magnitude = doc.number_in(at / "magnitude", m.magnitude, 0, 1, "");
  m.phase_deg = doc.number_in(at / "phase_deg", m.phase_deg, -180, 180, "degrees");
  m.offset_delay_ps = doc.number_in(at / "offset_delay_ps", m.offset_delay_ps, 0, 1e5, "ps");
  return m;
}

// "standards"/"offset_line": the DUT-OFFSET arm's line as built, every key optional.
OffsetLineParams read_offset_line(const JsoncDocument& doc, const JsonPointer& at, OffsetLineParams p) {
  if (!doc.has(at)) return p;
  doc.require_object(at);
  doc.check_keys(at, {"delay_ps", "loss_db", "match_return_loss_db", "match_phase_deg"});
  p.delay_ps = doc.number_in(at / "delay_ps", p.delay_ps, 0, 1e5, "ps");
  p.loss_db = doc.number_in(at / "loss_db", p.loss_db, 0, 10, "dB");
  p.match_return_loss_db = doc.number_in(at / "match_return_loss_db", p.match_return_loss_db, 6, 120, "dB");
  p.match_phase_deg = doc.number_in(at / "match_phase_deg", p.match_phase_deg, -180, 180, "degrees");
  return p;
}

// "standards": every key optional, defaults in StandardsParams. A switch's older
// "load_return_loss_db" setting still works; given in both places, the two must agree.
StandardsParams read_standards(const JsoncDocument& doc, const JsonPointer& at) {
  StandardsParams s;
  if (!doc.has(at)) return s;
  doc.require_object(at);
  doc.check_keys(at, {"open_gamma_magnitude", "open_capacitance_ff", "short_gamma_magnitude", "short_inductance_ph",
                      "load_return_loss_db", "mismatch_a", "mismatch_b", "offset_line"});
  s.open_gamma_magnitude = doc.number_in(at / "open_gamma_magnitude", s.open_gamma_magnitude, 0.5, 1, "");
  s.open_capacitance_ff = doc.number_in(at / "open_capacitance_ff", s.open_capacitance_ff, 0, 1000, "fF");
  s.short_gamma_magnitude = doc.number_in(at / "short_gamma_magnitude", s.short_gamma_magnitude, 0.5, 1, "");
  s.short_inductance_ph = doc.number_in(at / "short_inductance_ph", s.short_inductance_ph, 0, 1000, "pH");
  s.load_return_loss_db = doc.number_in(at / "load_return_loss_db", s.load_return_loss_db, 6, 80, "dB");
  s.mismatch_a = read_mismatch(doc, at / "mismatch_a", s.mismatch_a);
  s.mismatch_b = read_mismatch(doc, at / "mismatch_b", s.mismatch_b);
  s.offset_line = read_offset_line(doc, at / "offset_line", s.offset_line);
  return s;
}

void check_switch_load(const JsoncDocument& doc, const SimConfig& cfg) {
  const JsonPointer standards_load = JsonPointer() / "standards" / "load_return_loss_db";
  if (!doc.has(standards_load)) return;
  for (const auto& inst : cfg.instruments) {
    if (inst.role != "switch" || !inst.settings.contains("load_return_loss_db")) continue;
    const auto& v = inst.settings["load_return_loss_db"];
    if (!v.is_number() || v.get<double>() != cfg.standards.load_return_loss_db) {
      doc.fail(JsonPointer() / "instruments" / "switch" / "settings" / "load_return_loss_db",
               "differs from /standards/load_return_loss_db; give the LOAD's return loss in one place");
    }
  }
}

LatencyProfile read_latency(const JsoncDocument& doc, const JsonPointer& at) {
  const std::string name = doc.enum_or(at / "profile", "instant", {"instant", "bench"});
  LatencyProfile p = *latency_profile(name);
  if (!doc.has(at)) return p;
  doc.require_object(at);
  doc.check_keys(at, {"profile", "command_ms", "delay_scale", "instant_step_s"});
  if (!p.instant) p.command_s = doc.number_in(at / "command_ms", p.command_s * 1000, 0, 10000, "ms") / 1000;
  p.delay_scale = doc.number_in(at / "delay_scale", p.delay_scale, 0, 1000, "");
  p.instant_step_s = doc.number_in(at / "instant_step_s", p.instant_step_s, 0, 1e6, "s");
  return p;
}

InstrumentConfig read_instrument(const JsoncDocument& doc, const JsonPointer& at, const std::string& role) {
  InstrumentConfig inst;
  inst.role = role;
  inst.key = drivers::key_path(at);
  doc.require_object(at);
  doc.check_keys(at, {"endpoints", "settings", "faults"});
  read_endpoints(doc, at / "endpoints", inst.endpoints, true);
  inst.settings_line = doc.line_of(at / "settings");
  if (doc.has(at / "settings")) inst.settings = doc.require_object(at / "settings");
  if (doc.has(at / "faults")) {
    const auto& list = doc.require_array(at / "faults");
    for (std::size_t i = 0; i < list.size(); ++i) {
      auto spec = fault_from_json(list[i]);
      if (!spec.ok()) doc.fail(at / "faults" / i, spec.error().message);
      inst.faults.push_back(spec.value());
    }
  }
  return inst;
}

SimConfig from_document(const JsoncDocument& doc) {
  const JsonPointer root;
  SimConfig cfg;
  cfg.file = doc.file();
  doc.require_object(root);
  doc.check_keys(root, {"name", "bench", "standards", "trigger_cable", "latency", "lot", "control", "instruments"});
  cfg.name = doc.string_or(root / "name", "");
  cfg.bench = read_bench(doc, root / "bench");
  cfg.standards = read_standards(doc, root / "standards");
  cfg.latency = read_latency(doc, root / "latency");
  if (doc.has(root / "trigger_cable")) {
    const JsonPointer at = root / "trigger_cable";
    doc.require_object(at);
    doc.check_keys(at, {"latency_ns", "jitter_ns"});
    cfg.trigger_cable.present = true;
    cfg.trigger_cable.latency_s = doc.number_in(at / "latency_ns", cfg.trigger_cable.latency_s * 1e9, 0, 1e6, "ns") * 1e-9;
    cfg.trigger_cable.jitter_s = doc.number_in(at / "jitter_ns", cfg.trigger_cable.jitter_s * 1e9, 0, 1e6, "ns") * 1e-9;
  }
  if (auto lot = doc.optional_string(root / "lot")) {
    std::filesystem::path p(*lot);
    if (p.is_relative()) p = std::filesystem::path(doc.file()).parent_path() / p;
    cfg.lot = p.lexically_normal();
  }
  if (doc.has(root / "control")) {
    read_endpoints(doc, root / "control", cfg.control, false);
  } else {
    cfg.control.tcp = true;
  }
  const JsonPointer insts = root / "instruments";
  doc.require_object(insts);
  doc.check_keys(insts, {"source", "receiver", "switch"});
  for (const char* role : {"source", "receiver"}) {
    if (!doc.has(insts / role)) doc.fail(insts, std::string("needs a \"") + role + "\" section");
  }
  for (const char* role : {"source", "receiver", "switch"}) {
    if (doc.has(insts / role)) cfg.instruments.push_back(read_instrument(doc, insts / role, role));
  }
  check_switch_load(doc, cfg);
  return cfg;
}

}  // namespace

Result<FaultSpec> fault_from_json(const nlohmann::json& j) {
  if (!j.is_object()) return make_error(ErrorKind::invalid_argument, "a fault must be an object");
  FaultSpec spec;
  static const std::vector<std::string> kKeys{"kind", "probability", "seed", "delay_ms",
                                              "error_code", "error_message", "identity"};
  for (const auto& [key, value] : j.items()) {
    if (std::find(kKeys.begin(), kKeys.end(), key) == kKeys.end()) {
      return make_error(ErrorKind::invalid_argument, "unknown key \"" + key + "\"");
    }
    (void)value;
  }
  if (!j.contains("kind") || !j["kind"].is_string()) {
    return make_error(ErrorKind::invalid_argument, "kind: expected one of " + fault_kind_names());
  }
  const auto kind = parse_fault_kind(j["kind"].get<std::string>());
  if (!kind) {
    return make_error(ErrorKind::invalid_argument,
                      "kind: unknown fault \"" + j["kind"].get<std::string>() + "\" (one of " + fault_kind_names() + ")");
  }
  spec.kind = *kind;
  auto number = [&](const char* key, double& out, double lo, double hi) -> Status {
    if (!j.contains(key)) return {};
    if (!j[key].is_number()) return make_error(ErrorKind::invalid_argument, std::string(key) + ": expected a number");
    const double v = j[key].get<double>();
    if (!(v >= lo && v <= hi)) {
      return make_error(ErrorKind::invalid_argument,
                        std::string(key) + ": " + j[key].dump() + " is outside " + nlohmann::json(lo).dump() + ".." + nlohmann::json(hi).dump());
    }
    out = v;
    return {};
  };
  if (auto s = number("probability", spec.probability, 0, 1); !s) return s.error();
  if (auto s = number("delay_ms", spec.delay_ms, 0, 3.6e6); !s) return s.error();
  double code = spec.error_code;
  if (auto s = number("error_code", code, -32768, 32767); !s) return s.error();
  spec.error_code = static_cast<int>(code);
  if (j.contains("seed")) {
    if (!j["seed"].is_number_integer() || j["seed"].get<std::int64_t>() < 0) {
      return make_error(ErrorKind::invalid_argument, "seed: expected a non-negative integer");
    }
    spec.seed = j["seed"].get<std::uint64_t>();
  }
  for (auto [key, out] : {std::pair{"error_message", &spec.error_message}, std::pair{"identity", &spec.identity}}) {
    if (!j.contains(key)) continue;
    if (!j[key].is_string()) return make_error(ErrorKind::invalid_argument, std::string(key) + ": expected a string");
    *out = j[key].get<std::string>();
  }
  return spec;
}

std::optional<LatencyProfile> override_profile(const LatencyProfile& from_file, std::string_view name) {
  if (name == from_file.name) return from_file;
  auto p = latency_profile(name);
  if (!p) return std::nullopt;
  p->delay_scale = from_file.delay_scale;
  p->instant_step_s = from_file.instant_step_s;
  return p;
}

SimConfig load_sim_config(const std::filesystem::path& file) { return from_document(JsoncDocument::load(file)); }

SimConfig parse_sim_config(std::string text, std::string file_name) {
  return from_document(JsoncDocument::parse(std::move(text), std::move(file_name)));
}

}  // namespace echoline::sim
