// Loading config/station.jsonc: instruments, fixture, paths, API.
#include "drivers/station_config.hpp"

#include <algorithm>
#include <regex>
#include <set>

#include <fmt/format.h>

#include "drivers/jsonc.hpp"
#include "drivers/profile.hpp"
#include "drivers/serial_transport.hpp"
#include "drivers/tcp_transport.hpp"
#include "drivers/wire.hpp"

namespace echoline::drivers {

bool is_loopback_host(const std::string& host) { return host == "127.0.0.1" || host == "::1" || host == "localhost"; }

namespace {

const JsonPointer kRoot{};

const std::vector<std::string> kRoles{"source", "receiver", "switch"};

// What is wrong with an instrument address, or "" when it parses (tcp://host:port or
// serial:<device>[?...]). The link is not opened.
std::string address_problem(const std::string& address) {
  if (address.starts_with(wire::kTcpScheme)) {
    auto endpoint = parse_tcp_address(address);
    return endpoint ? "" : endpoint.error().message;
  }
  if (address.starts_with(wire::kSerialScheme)) {
    auto settings = parse_serial_address(address);
    return settings ? "" : settings.error().message;
  }
  return fmt::format("\"{}\" is not an instrument address; expected \"tcp://host:port\" or "
                     "\"serial:<device>[?baud=...]\"", address);
}

std::filesystem::path resolve(const std::filesystem::path& base, const std::string& p) {
  std::filesystem::path path(p);
  if (path.empty() || path.is_absolute()) return path.lexically_normal();
  return (base / path).lexically_normal();
}

void load_fixture(const JsoncDocument& doc, FixtureConfig& f) {
  const JsonPointer at = kRoot / "fixture";
  doc.check_keys(at, {"coupling_db", "mainline_loss_db", "cable_loss_db", "source_match_db", "nominal_directivity_db",
                      "test_port_delay_ns", "start_pulse_cable"});
  f.coupling_db = doc.number_in(at / "coupling_db", f.coupling_db, 1, 60, "dB");
  f.mainline_loss_db = doc.number_in(at / "mainline_loss_db", f.mainline_loss_db, 0, 10, "dB");
  f.cable_loss_db = doc.number_in(at / "cable_loss_db", f.cable_loss_db, 0, 20, "dB");
  f.source_match_db = doc.number_in(at / "source_match_db", f.source_match_db, 0, 80, "dB");
  f.nominal_directivity_db = doc.number_in(at / "nominal_directivity_db", f.nominal_directivity_db, 0, 80, "dB");
  f.test_port_delay_ns = doc.number_in(at / "test_port_delay_ns", f.test_port_delay_ns, 0, 1000, "ns");
  f.start_pulse_cable = doc.bool_or(at / "start_pulse_cable", f.start_pulse_cable);
}

void load_api(const JsoncDocument& doc, const std::filesystem::path& base, const std::filesystem::path& data_dir, ApiConfig& a) {
  const JsonPointer at = kRoot / "api";
  doc.check_keys(at, {"unix_socket", "tcp_host", "tcp_port", "token_file"});
  a.unix_socket = doc.has(at / "unix_socket") ? resolve(base, doc.require_string(at / "unix_socket")) : data_dir / "echolined.sock";
  // sockaddr_un.sun_path holds 108 bytes including the terminating NUL.
  if (a.unix_socket.string().size() > 107)
    doc.fail(at / "unix_socket", fmt::format("socket path \"{}\" is {} bytes; a unix socket path holds at most 107",
                                             a.unix_socket.string(), a.unix_socket.string().size()));
  a.tcp_host = doc.string_or(at / "tcp_host", a.tcp_host);
  if (a.tcp_host.empty()) doc.fail(at / "tcp_host", "must not be empty");
  a.tcp_port = static_cast<int>(doc.integer_or(at / "tcp_port", a.tcp_port));
  if (a.tcp_port < 0 || a.tcp_port > 65535) doc.fail(at / "tcp_port", "must be 0 (TCP off) or a port 1..65535");
  // null, like a missing key, means no token: the API serves the local socket only.
  const bool token = doc.has(at / "token_file") && !doc.at(at / "token_file").is_null();
  a.token_file = token ? resolve(base, doc.require_string(at / "token_file")) : std::filesystem::path{};
  a.token_file_line = token ? doc.line_of(at / "token_file") : 0;
  const bool loopback = is_loopback_host(a.tcp_host);
  if (a.tcp_port != 0 && !loopback && a.token_file.empty())
    doc.fail(at / "tcp_host", fmt::format("listening on {} (not loopback) needs a token_file: anyone on the network "
                                          "could otherwise drive the instruments", a.tcp_host));
}


void load_web(const JsoncDocument& doc, const ApiConfig& api, WebConfig& w) {
  const JsonPointer at = kRoot / "web";
  doc.check_keys(at, {"host", "port"});
  w.host = doc.string_or(at / "host", w.host);
  if (w.host.empty()) doc.fail(at / "host", "must not be empty");
  w.port = static_cast<int>(doc.integer_or(at / "port", w.port));
  if (w.port < 0 || w.port > 65535) doc.fail(at / "port", "must be 0 (pages off) or a port 1..65535");
  if (w.port != 0 && !is_loopback_host(w.host) && api.token_file.empty())
    doc.fail(at / "host", fmt::format("serving the pages on {} (not loopback) needs api.token_file: anyone on the "
                                      "network could otherwise drive the instruments", w.host));
}

void load_instruments(const JsoncDocument& doc, const std::filesystem::path& base, std::vector<InstrumentConfig>& out) {
  const JsonPointer at = kRoot / "instruments";
  const auto& arr = doc.require_array(at);
  std::set<std::string> roles, names;
  for (std::size_t i = 0; i < arr.size(); ++i) {
    const JsonPointer e = at / i;
    doc.require_object(e);
    doc.check_keys(e, {"role", "name", "address", "profile"});
    InstrumentConfig ic;
    ic.role = doc.require_enum(e / "role", kRoles);
    ic.name = doc.require_string(e / "name");
    if (ic.name.empty()) doc.fail(e / "name", "must not be empty");
    ic.address = doc.require_string(e / "address");
    if (const std::string problem = address_problem(ic.address); !problem.empty()) doc.fail(e / "address", problem);
    ic.profile = resolve(base, doc.require_string(e / "profile"));
    if (!roles.insert(ic.role).second) doc.fail(e / "role", fmt::format("a second {} instrument; one per role", ic.role));
    if (!names.insert(ic.name).second) doc.fail(e / "name", fmt::format("name \"{}\" is used twice", ic.name));
    std::error_code ec;
    if (!std::filesystem::is_regular_file(ic.profile, ec))
      doc.fail(e / "profile", fmt::format("profile file \"{}\" does not exist", ic.profile.string()));
    Profile p = load_profile(ic.profile);   // its own errors name the profile file
    if (p.role != ic.role)
      doc.fail(e / "profile", fmt::format("profile {} is for role {}, the instrument's role is {}", p.name, p.role, ic.role));
    out.push_back(std::move(ic));
  }
  for (const char* needed : {"source", "receiver"})
    if (!roles.count(needed)) doc.fail(at, fmt::format("no {} instrument; a station needs a source and a receiver", needed));
}

}  // namespace

StationConfig load_station_config(const std::filesystem::path& file) {
  JsoncDocument doc = JsoncDocument::load(file);
  if (!doc.root().is_object()) doc.fail(kRoot, "a station config is a JSON object {...}");
  doc.check_keys(kRoot, {"station", "data_dir", "log_dir", "recipe", "instruments", "fixture", "api", "serial_pattern",
                        "calibration_kit", "web", "central"});
  const std::filesystem::path base = std::filesystem::absolute(file).parent_path();
  StationConfig c;
  c.file = doc.file();
  c.station = doc.require_string(kRoot / "station");
  if (c.station.empty()) doc.fail(kRoot / "station", "must not be empty");
  c.data_dir = resolve(base, doc.require_string(kRoot / "data_dir"));
  // null: no log file (under systemd the journal keeps the log).
  if (!doc.has(kRoot / "log_dir")) c.log_dir = c.data_dir / "log";
  else if (!doc.at(kRoot / "log_dir").is_null()) c.log_dir = resolve(base, doc.require_string(kRoot / "log_dir"));
  c.recipe = doc.has(kRoot / "recipe") ? resolve(base, doc.require_string(kRoot / "recipe")) : std::filesystem::path{};
  c.recipe_line = doc.has(kRoot / "recipe") ? doc.line_of(kRoot / "recipe") : 0;
  load_instruments(doc, base, c.instruments);
  load_fixture(doc, c.fixture);
  if (doc.has(kRoot / "calibration_kit")) {
    c.calibration_kit = resolve(base, doc.require_string(kRoot / "calibration_kit"));
    std::error_code ec;
    if (!std::filesystem::is_regular_file(c.calibration_kit, ec)) {
      doc.fail(kRoot / "calibration_kit", fmt::format("calibration-kit file \"{}\" does not exist", c.calibration_kit.string()));
    }
  }
  load_api(doc, base, c.data_dir, c.api);
  load_web(doc, c.api, c.web);
  if (doc.has(kRoot / "central")) {
    // Only the path here: the settings file itself is read (and its permissions checked) by the
    // forwarder and the client, so a station config never holds a password.
    c.central_settings = resolve(base, doc.require_string(kRoot / "central"));
  }
  c.serial_pattern = doc.string_or(kRoot / "serial_pattern", c.serial_pattern);
  try {
    std::regex re(c.serial_pattern, std::regex::ECMAScript);
  } catch (const std::regex_error& e) {
    doc.fail(kRoot / "serial_pattern", fmt::format("not a valid regular expression: {}", e.what()));
  }
  return c;
}

void apply_address_override(StationConfig& config, const std::string& role, const std::string& address) {
  const std::string option = fmt::format("--override {}={}", role, address);
  auto fail = [&](const std::string& message) { throw ConfigError(option, 0, "", message); };
  std::string present;
  for (const auto& i : config.instruments) present += (present.empty() ? "" : ", ") + i.role;
  if (std::find(kRoles.begin(), kRoles.end(), role) == kRoles.end())
    fail(fmt::format("\"{}\" is not an instrument role; the roles are source, receiver and switch ({} has {})",
                     role, config.file, present));
  InstrumentConfig* target = nullptr;
  for (auto& i : config.instruments)
    if (i.role == role) target = &i;
  if (!target) fail(fmt::format("{} has no {} instrument to override; its instruments: {}", config.file, role, present));
  if (const std::string problem = address_problem(address); !problem.empty()) fail(problem);
  target->address = address;
}

}  // namespace echoline::drivers
