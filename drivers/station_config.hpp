// Station configuration (config/station.jsonc): which instruments at which addresses with which
// profiles, the fixture's RF figures, where data and logs go, and how the API listens.
// Loaded once at start-up (throws ConfigError); immutable afterwards, safe to share.
#pragma once

#include <filesystem>
#include <string>
#include <vector>

#include "drivers/config_error.hpp"

namespace echoline::drivers {

struct InstrumentConfig {
  std::string role, name, address;        // role: source|receiver|switch; address: see make_transport()
  std::filesystem::path profile;          // absolute after loading
};

// The coupler/cable fixture between source, receiver and test port. Units in the names.
struct FixtureConfig {
  double coupling_db = 20;             // coupler coupling factor, main line -> coupled port (positive dB)
  double mainline_loss_db = 0.5;       // coupler main-line insertion loss (dB)
  double cable_loss_db = 0.3;          // test-port cable loss, one way (dB)
  double source_match_db = 25;         // test-port source match as return loss (dB)
  double nominal_directivity_db = 30;  // coupler directivity from its datasheet (dB); calibration measures the effective one
  double test_port_delay_ns = 2.5;     // one-way electrical delay coupler -> test port (cable and adapters), ns
  bool start_pulse_cable = false;      // the source's ramp-start pulse output is cabled to the receiver's
                                       // external trigger input (fast capture starts on a known ramp phase)
};

struct ApiConfig {
  std::filesystem::path unix_socket;   // absolute after loading
  std::string tcp_host = "127.0.0.1";  // loopback unless set otherwise
  int tcp_port = 0;                    // 0 = TCP off
  std::filesystem::path token_file;    // absolute after loading; "" = none
  int token_file_line = 0;             // where the config names it (for the daemon's message)
};

// The browser pages and /metrics (daemon/web/): loopback only unless a token file is configured.
struct WebConfig {
  std::string host = "127.0.0.1";      // loopback unless set otherwise
  int port = 0;                        // 0 = pages off
};

struct StationConfig {
  std::string station;
  std::filesystem::path data_dir, log_dir, recipe;   // absolute after loading; log_dir empty = no log file
  int recipe_line = 0;                              // where the config names the recipe (for messages)
  std::vector<InstrumentConfig> instruments;
  FixtureConfig fixture;
  std::filesystem::path calibration_kit;                    // kit definition file (absolute); "" = built-in conservative kit
  ApiConfig api;
  WebConfig web;
  // Connection settings file of the central PostgreSQL database (absolute); "" = runs stay on
  // the station. Read by the forwarder in echolined and by the client's central readers.
  std::filesystem::path central_settings;
  std::string serial_pattern = "^[A-Za-z0-9._-]{1,64}$";   // ECMAScript regex for unit serials
  std::string file;                                         // the file it was loaded from

  // The instrument with this role, or nullptr.
  const InstrumentConfig* find_role(const std::string& role) const {
    for (const auto& i : instruments) if (i.role == role) return &i;
    return nullptr;
  }
};

// Throws ConfigError; relative paths are resolved against the file's folder.
StationConfig load_station_config(const std::filesystem::path& file);

// 127.0.0.1, ::1 or localhost: a listener there needs no token.
bool is_loopback_host(const std::string& host);

// echolined --override ROLE=ADDRESS: puts ADDRESS on the instrument with ROLE. Throws ConfigError
// whose what() starts with "--override ROLE=ADDRESS": an unknown role (the valid ones listed), a
// role this station has no instrument for, or an address that does not parse.
void apply_address_override(StationConfig& config, const std::string& role, const std::string& address);

}  // namespace echoline::drivers
