// Instrument profiles (config/instruments/*.jsonc): everything a role driver needs to know about
// one instrument model — identity, I/O settings, error policy, limits, init lines and the SCPI
// text of each operation. A new SCPI instrument needs a profile, not code. Immutable once
// loaded; safe to share between threads. See config/README.md for every field.
#pragma once

#include <filesystem>
#include <map>
#include <set>
#include <string>
#include <string_view>
#include <vector>

#include "drivers/command_template.hpp"
#include "drivers/config_error.hpp"
#include "drivers/result.hpp"
#include "drivers/scpi_codec.hpp"
#include "drivers/scpi_session.hpp"

namespace echoline::drivers {

// Sweep figures of a source (its frequency ramp) or a receiver (its swept trace), for planning a
// fast capture. 0 / empty = not given in the profile (the planner's generic figures apply).
struct SweepLimits {
  double min_time_s = 0, max_time_s = 0;   // one ramp (source) or one sweep (receiver), s
  double retrace_s = 0;                    // source: ramp end back to its start, s
  double rearm_s = 0;                      // receiver: end of a triggered sweep to the next start, s
  int max_points = 0;                      // receiver: trace points
  // Ramp-start pulse (source) and external trigger input (receiver), for a receiver sweep
  // started at a known phase of the ramp; negative = the instrument has none.
  double start_pulse_uncertainty_s = -1;   // source: pulse output against the ramp's start, ± s
  double trigger_latency_s = 0;            // receiver: trigger input to sweep start at zero delay, s
  double trigger_uncertainty_s = -1;       // receiver: ± s around that latency
  double time_accuracy_ppm = -1;           // ramp (source) or sweep (receiver) time, ± ppm; negative = not given
  std::vector<double> rbw_steps_hz;        // receiver: the RBWs it offers, increasing
};

struct Profile {
  std::string name, role /*source|receiver|switch*/, description, file;
  std::string identity_manufacturer, identity_model;   // expected *IDN? fields ("" = any; '*' and '?' wildcards)
  SessionOptions io;
  std::string check_errors = "each-step";              // "each-step" | "end-of-sweep" | "never"
  bool reset_on_initialize = true;                     // send *RST before *CLS and the init lines
  double min_frequency_hz = 0, max_frequency_hz = 0;   // source and receiver
  double min_power_dbm = 0, max_power_dbm = 0;         // source: output level; receiver: reference level
  double max_safe_input_dbm = 0;                       // receiver: damage level at its input (dBm)
  double noise_figure_db = 0;                          // receiver, for station capability
  double max_attenuation_db = 0;                       // receiver: input attenuator range 0..max (dB)
  std::string trace_format = "ascii";                  // receiver: "ascii" | "real32"
  std::string byte_order = "normal";                   // receiver, real32: "normal" (big-endian) | "swapped"
  SweepLimits sweep;                                   // source and receiver: "sweep" section
  std::map<std::string, CommandTemplate> commands;     // by operation name
  std::set<std::string> absent;                        // operations declared absent (`"set_vbw": null`)
  std::vector<std::string> init;                       // lines sent on initialize()
  std::map<std::string, std::string> positions;        // switch: OPEN/SHORT/LOAD/DUT -> position token

  bool has(std::string_view operation) const { return commands.count(std::string(operation)) != 0; }
  // True when the profile says the instrument lacks `operation` (null in "commands").
  bool declares_absent(std::string_view operation) const { return absent.count(std::string(operation)) != 0; }
  // REQUIRES: has(operation) (true for every required operation of the role unless declared absent).
  const CommandTemplate& command(std::string_view operation) const { return commands.at(std::string(operation)); }
};

// Loads and checks a profile. Throws ConfigError naming file, line and key.
Profile load_profile(const std::filesystem::path& file);

// True when `text` matches `pattern` ("" matches anything; '*' any run, '?' one character;
// case-sensitive, whole string).
bool identity_field_matches(std::string_view pattern, std::string_view text);

// Compares an *IDN? reply with the profile's expected fields. Error (instrument) reads
// "<instrument>: identity: expected manufacturer "X" model "Y", instrument says "<IDN reply>"".
Status check_identity(const scpi::Identity& id, const Profile& profile, std::string_view instrument_name);

// Sends *IDN?, then check_identity(). The *IDN? reply is returned for the run record.
Result<scpi::Identity> identify_and_verify(ScpiSession& session, const Profile& profile);
Status verify_identity(ScpiSession& session, const Profile& profile);

}  // namespace echoline::drivers
