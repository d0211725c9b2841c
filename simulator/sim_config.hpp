// The echoline-sim configuration file (config/sim/*.jsonc): bench physics, the calibration
// standards, the instruments with their endpoints, settings and faults, the control port, the
// latency profile and the default lot. Loading throws drivers::ConfigError ("<file>:<line>: <key>: <message>") at start-up;
// the result is plain data. Threading: none (load once, then read).
#pragma once

#include <filesystem>
#include <optional>
#include <string>
#include <vector>

#include <nlohmann/json.hpp>

#include "drivers/result.hpp"
#include "simulator/faults.hpp"
#include "simulator/latency.hpp"
#include "simulator/physics/bench.hpp"
#include "simulator/physics/standards.hpp"

namespace echoline::sim {

// Where one instrument (or the control port) listens. At least one of tcp / pty.
struct EndpointConfig {
  bool tcp = false;
  std::string host = "127.0.0.1";   // "tcp.host": address to bind; loopback by default
  int port = 0;                     // "tcp.port": 0 picks a free port (printed at start)
  bool pty = false;
  std::string link;                 // "pty.link": optional symlink to the pty slave, removed at exit
  int baud = 115200;                // "pty.baud": printed in the address; a pty does not emulate it
};

struct InstrumentConfig {
  std::string role;                 // "source" | "receiver" | "switch"
  EndpointConfig endpoints;         // "endpoints"
  nlohmann::json settings = nlohmann::json::object();   // "settings": passed to the instrument factory
  std::vector<FaultSpec> faults;    // "faults": armed at start
  std::string key;                  // JSON pointer of the section, for messages
  int settings_line = 0;            // line of "settings" (or of the section), for messages
};

// A cable from the source's ramp-start pulse output to the receiver's external trigger input.
struct TriggerCable {
  bool present = false;
  double latency_s = 100e-9;   // ramp start to the receiver's sweep start at zero trigger delay
  double jitter_s = 20e-9;     // +- (uniform) around it
};

struct SimConfig {
  std::string file;                       // as given
  std::string name;                       // "name": free text for logs
  BenchParams bench;                      // "bench": fixture physics (BenchParams fields)
  StandardsParams standards;              // "standards": the standards and the offset line (StandardsParams fields)
  TriggerCable trigger_cable;             // "trigger_cable": {"latency_ns", "jitter_ns"}; absent = no cable
  LatencyProfile latency;                 // "latency": {"profile", "command_ms", "delay_scale", "instant_step_s"}
  std::optional<std::filesystem::path> lot;   // "lot": default lot file, relative to this file
  EndpointConfig control;                 // "control": the control port (TCP only)
  std::vector<InstrumentConfig> instruments;  // "instruments": source and receiver required, switch optional
};

SimConfig load_sim_config(const std::filesystem::path& file);     // throws drivers::ConfigError
SimConfig parse_sim_config(std::string text, std::string file_name);  // same, from text

// A fault from JSON ({"kind":..,"probability":..,"seed":..,"delay_ms":..,"error_code":..,
// "error_message":..,"identity":..}); unknown keys are refused. Used by the config loader and
// the control port. Error messages name the key.
Result<FaultSpec> fault_from_json(const nlohmann::json& j);

// The profile with the file's overrides replaced by another named profile's defaults
// (--profile on the command line). nullopt for an unknown name.
std::optional<LatencyProfile> override_profile(const LatencyProfile& from_file, std::string_view name);

}  // namespace echoline::sim
