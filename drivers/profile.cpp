// Loading instrument profiles and checking an instrument's identity against one.
#include "drivers/profile.hpp"

#include <algorithm>
#include <cmath>

#include <fmt/format.h>

#include "drivers/jsonc.hpp"

namespace echoline::drivers {
namespace {

using nlohmann::json;
const JsonPointer kRoot{};

void load_io(const JsoncDocument& doc, Profile& p) {
  const JsonPointer io = kRoot / "io";
  doc.check_keys(io, {"write_terminator", "read_terminator", "timeout_ms", "opc_timeout_ms", "max_reply_bytes"});
  if (!doc.has(io)) return;
  p.io.write_terminator = doc.string_or(io / "write_terminator", p.io.write_terminator);
  if (p.io.write_terminator != "\n" && p.io.write_terminator != "\r\n")
    doc.fail(io / "write_terminator", "must be \"\\n\" or \"\\r\\n\"");
  std::string rt = doc.string_or(io / "read_terminator", std::string(1, p.io.read_terminator));
  if (rt.size() != 1) doc.fail(io / "read_terminator", "must be exactly one character, e.g. \"\\n\"");
  p.io.read_terminator = rt[0];
  p.io.timeout = Millis(static_cast<long>(doc.number_in(io / "timeout_ms", static_cast<double>(p.io.timeout.count()), 1, 600000, "ms")));
  p.io.opc_timeout = Millis(static_cast<long>(doc.number_in(io / "opc_timeout_ms", static_cast<double>(p.io.opc_timeout.count()), 1, 3600000, "ms")));
  if (doc.has(io / "max_reply_bytes")) {
    auto n = doc.require_integer(io / "max_reply_bytes");
    if (n < 64 || n > (1ll << 30)) doc.fail(io / "max_reply_bytes", "must be between 64 and 1073741824 bytes");
    p.io.max_reply_bytes = static_cast<std::size_t>(n);
  }
}

void load_limits(const JsoncDocument& doc, Profile& p) {
  const JsonPointer lim = kRoot / "limits";
  if (p.role == "switch") {
    if (doc.has(lim)) doc.fail(lim, "a switch profile has no limits");
    return;
  }
  doc.require_object(lim);
  doc.check_keys(lim, {"min_frequency_hz", "max_frequency_hz", "min_power_dbm", "max_power_dbm"});
  p.min_frequency_hz = doc.require_number(lim / "min_frequency_hz", "Hz");
  p.max_frequency_hz = doc.require_number(lim / "max_frequency_hz", "Hz");
  p.min_power_dbm = doc.require_number(lim / "min_power_dbm", "dBm");
  p.max_power_dbm = doc.require_number(lim / "max_power_dbm", "dBm");
  if (p.min_frequency_hz < 0) doc.fail(lim / "min_frequency_hz", "must not be negative");
  if (!(p.max_frequency_hz > p.min_frequency_hz))
    doc.fail(lim / "max_frequency_hz", fmt::format("must be above min_frequency_hz ({} Hz)", p.min_frequency_hz));
  if (!(p.max_power_dbm > p.min_power_dbm))
    doc.fail(lim / "max_power_dbm", fmt::format("must be above min_power_dbm ({} dBm)", p.min_power_dbm));
}

void load_receiver(const JsoncDocument& doc, Profile& p) {
  const JsonPointer r = kRoot / "receiver";
  if (p.role != "receiver") {
    if (doc.has(r)) doc.fail(r, fmt::format("only a receiver profile has a \"receiver\" section (role is {})", p.role));
    return;
  }
  doc.require_object(r);
  doc.check_keys(r, {"max_safe_input_dbm", "noise_figure_db", "max_attenuation_db", "trace_format", "byte_order"});
  // No default: the damage level must come from the instrument's datasheet.
  p.max_safe_input_dbm = doc.require_number(r / "max_safe_input_dbm", "dBm");
  p.noise_figure_db = doc.require_number(r / "noise_figure_db", "dB");
  if (p.noise_figure_db < 0) doc.fail(r / "noise_figure_db", "must not be negative");
  p.max_attenuation_db = doc.number_in(r / "max_attenuation_db", 0, 0, 200, "dB");
  p.trace_format = doc.enum_or(r / "trace_format", p.trace_format, {"ascii", "real32"});
  p.byte_order = doc.enum_or(r / "byte_order", p.byte_order, {"normal", "swapped"});
}

// "sweep": {"time_range_s": [min, max], "retrace_s", "start_pulse_uncertainty_s",
// "time_accuracy_ppm"} for a source; {"time_range_s", "rearm_s", "max_points", "rbw_steps_hz":
// [...], "trigger_latency_s", "trigger_uncertainty_s", "time_accuracy_ppm"} for a receiver.
// Optional.
void load_sweep(const JsoncDocument& doc, Profile& p) {
  const JsonPointer s = kRoot / "sweep";
  if (!doc.has(s)) return;
  if (p.role == "switch") doc.fail(s, "a switch profile has no sweep section");
  doc.require_object(s);
  if (p.role == "source") doc.check_keys(s, {"time_range_s", "retrace_s", "start_pulse_uncertainty_s", "time_accuracy_ppm"});
  else
    doc.check_keys(s, {"time_range_s", "rearm_s", "max_points", "rbw_steps_hz", "trigger_latency_s", "trigger_uncertainty_s",
                       "time_accuracy_ppm"});
  SweepLimits& w = p.sweep;
  if (doc.has(s / "time_range_s")) {
    const json& range = doc.require_array(s / "time_range_s");
    if (range.size() != 2) doc.fail(s / "time_range_s", "expected [shortest, longest] in seconds");
    w.min_time_s = doc.require_number(s / "time_range_s" / std::size_t{0}, "s");
    w.max_time_s = doc.require_number(s / "time_range_s" / std::size_t{1}, "s");
    if (!(w.min_time_s > 0) || !(w.max_time_s >= w.min_time_s))
      doc.fail(s / "time_range_s", fmt::format("[{}, {}]: need 0 < shortest <= longest", w.min_time_s, w.max_time_s));
  }
  w.retrace_s = doc.number_in(s / "retrace_s", 0, 0, 10, "s");
  w.rearm_s = doc.number_in(s / "rearm_s", 0, 0, 10, "s");
  w.start_pulse_uncertainty_s = doc.number_in(s / "start_pulse_uncertainty_s", -1, 0, 1, "s");
  w.trigger_latency_s = doc.number_in(s / "trigger_latency_s", 0, 0, 1, "s");
  w.trigger_uncertainty_s = doc.number_in(s / "trigger_uncertainty_s", -1, 0, 1, "s");
  w.time_accuracy_ppm = doc.number_in(s / "time_accuracy_ppm", -1, 0, 1e5, "ppm");
  if (doc.has(s / "trigger_latency_s") && !doc.has(s / "trigger_uncertainty_s"))
    doc.fail(s / "trigger_latency_s", "give trigger_uncertainty_s with it (the ± around the latency)");
  if (doc.has(s / "max_points")) {
    const auto n = doc.require_integer(s / "max_points");
    if (n < 3 || n > 1000000) doc.fail(s / "max_points", fmt::format("{}: must be 3 to 1000000", n));
    w.max_points = static_cast<int>(n);
  }
  if (doc.has(s / "rbw_steps_hz")) {
    const json& steps = doc.require_array(s / "rbw_steps_hz");
    for (std::size_t i = 0; i < steps.size(); ++i) {
      const double v = doc.require_number(s / "rbw_steps_hz" / i, "Hz");
      if (!(v > 0) || (!w.rbw_steps_hz.empty() && v <= w.rbw_steps_hz.back()))
        doc.fail(s / "rbw_steps_hz" / i, fmt::format("{} Hz: steps must be above 0 Hz and increasing", v));
      w.rbw_steps_hz.push_back(v);
    }
  }
}

void load_switch(const JsoncDocument& doc, Profile& p) {
  const JsonPointer s = kRoot / "switch";
  if (p.role != "switch") {
    if (doc.has(s)) doc.fail(s, fmt::format("only a switch profile has a \"switch\" section (role is {})", p.role));
    return;
  }
  doc.require_object(s);
  doc.check_keys(s, {"positions"});
  const JsonPointer pos = s / "positions";
  const json& obj = doc.require_object(pos);
  if (obj.empty()) doc.fail(pos, "at least one position (OPEN, SHORT, LOAD, DUT) is needed");
  for (const auto& [name, value] : obj.items()) {
    // OPEN, SHORT, LOAD, DUT, or a kit's mismatch standard (its name: capitals, digits, '-').
    const bool spelled = !name.empty() && std::all_of(name.begin(), name.end(), [](char c) {
      return (c >= 'A' && c <= 'Z') || (c >= '0' && c <= '9') || c == '-';
    });
    if (!spelled) {
      doc.fail(pos / name, fmt::format("\"{}\" is not a standard's name: OPEN, SHORT, LOAD, DUT or a kit's mismatch "
                                       "standard such as MISMATCH-A (capitals, digits and '-')", name));
    }
    std::string token;
    if (value.is_number_integer()) token = std::to_string(value.get<long long>());
    else token = doc.require_string(pos / name);
    if (token.empty() || token.find_first_of(";\n\r\"'#{}") != std::string::npos)
      doc.fail(pos / name, "position token must be non-empty and free of ; \" ' # { } and line breaks");
    p.positions[name] = token;
  }
}

void load_commands(const JsoncDocument& doc, Profile& p) {
  const JsonPointer c = kRoot / "commands";
  const json& obj = doc.require_object(c);
  for (const auto& [op, value] : obj.items()) {
    if (value.is_null()) {
      // Declared absent: the instrument has no such setting.
      const OperationSpec* spec = find_operation(p.role, op);
      if (spec == nullptr) {
        auto t = CommandTemplate::parse(p.role, op, "x");   // for its "unknown operation" message
        doc.fail(c / op, t.ok() ? std::string("unknown operation") : t.error().message);
      }
      if (spec->required && !spec->may_be_absent)
        doc.fail(c / op, fmt::format("operation \"{}\" cannot be declared absent: every {} profile needs it", op, p.role));
      p.absent.insert(op);
      continue;
    }
    if (!value.is_string())
      doc.fail(c / op, fmt::format("expected the command text as a string (or null: the instrument lacks it), found {}",
                                   value.type_name()));
    auto t = CommandTemplate::parse(p.role, op, value.get<std::string>());
    if (!t.ok()) doc.fail(c / op, t.error().message);
    p.commands.emplace(op, std::move(t.value()));
  }
  for (const auto& spec : operation_table()) {
    if (spec.role != p.role || !spec.required || p.has(spec.name) || p.declares_absent(spec.name)) continue;
    doc.fail(c, fmt::format("operation \"{}\" is required for a {} profile and missing{}", spec.name, p.role,
                            spec.may_be_absent ? fmt::format(" (write \"{}\": null if the instrument has none)", spec.name)
                                               : std::string()));
  }
}

}  // namespace

Profile load_profile(const std::filesystem::path& file) {
  JsoncDocument doc = JsoncDocument::load(file);
  if (!doc.root().is_object()) doc.fail(kRoot, "a profile is a JSON object {...}");
  doc.check_keys(kRoot, {"name", "role", "description", "identity", "io", "check_errors", "reset_on_initialize",
                         "limits", "receiver", "sweep", "switch", "init", "commands"});
  Profile p;
  p.file = doc.file();
  p.name = doc.require_string(kRoot / "name");
  if (p.name.empty()) doc.fail(kRoot / "name", "must not be empty");
  p.role = doc.require_enum(kRoot / "role", {"source", "receiver", "switch"});
  p.description = doc.string_or(kRoot / "description", "");
  doc.check_keys(kRoot / "identity", {"manufacturer", "model"});
  p.identity_manufacturer = doc.string_or(kRoot / "identity" / "manufacturer", "");
  p.identity_model = doc.string_or(kRoot / "identity" / "model", "");
  load_io(doc, p);
  p.check_errors = doc.enum_or(kRoot / "check_errors", p.check_errors, {"each-step", "end-of-sweep", "never"});
  p.reset_on_initialize = doc.bool_or(kRoot / "reset_on_initialize", p.reset_on_initialize);
  load_limits(doc, p);
  load_receiver(doc, p);
  load_switch(doc, p);
  load_sweep(doc, p);
  p.init = doc.string_list_or_empty(kRoot / "init");
  for (std::size_t i = 0; i < p.init.size(); ++i) {
    const std::string& line = p.init[i];
    if (line.find_first_of("\r\n") != std::string::npos) doc.fail(kRoot / "init" / i, "line terminator inside an init line");
    if (line.find('?') != std::string::npos)
      doc.fail(kRoot / "init" / i, "init lines are sent without reading a reply; a query here would desynchronise the session");
  }
  load_commands(doc, p);
  return p;
}

bool identity_field_matches(std::string_view pattern, std::string_view text) {
  if (pattern.empty()) return true;
  // Iterative glob with backtracking on the last '*'.
  std::size_t p = 0, t = 0, star = std::string_view::npos, mark = 0;
  while (t < text.size()) {
    if (p < pattern.size() && (pattern[p] == '?' || pattern[p] == text[t])) { ++p; ++t; }
    else if (p < pattern.size() && pattern[p] == '*') { star = p++; mark = t; }
    else if (star != std::string_view::npos) { p = star + 1; t = ++mark; }
    else return false;
  }
  while (p < pattern.size() && pattern[p] == '*') ++p;
  return p == pattern.size();
}

Status check_identity(const scpi::Identity& id, const Profile& profile, std::string_view instrument_name) {
  if (identity_field_matches(profile.identity_manufacturer, id.manufacturer) &&
      identity_field_matches(profile.identity_model, id.model))
    return Status::success();
  auto want = [](const std::string& s) { return s.empty() ? std::string("(any)") : "\"" + s + "\""; };
  return make_error(ErrorKind::config,
                    fmt::format("{}: identity: profile {} expects manufacturer {} model {}, instrument says \"{},{},{},{}\"",
                                instrument_name, profile.name, want(profile.identity_manufacturer),
                                want(profile.identity_model), id.manufacturer, id.model, id.serial, id.firmware));
}

Result<scpi::Identity> identify_and_verify(ScpiSession& session, const Profile& profile) {
  auto id = session.identify();
  if (!id.ok()) return id.error();
  Status s = check_identity(id.value(), profile, session.name());
  if (!s.ok()) return s.error();
  return id;
}

Status verify_identity(ScpiSession& session, const Profile& profile) {
  auto id = identify_and_verify(session, profile);
  if (!id.ok()) return id.error();
  return Status::success();
}

}  // namespace echoline::drivers
