// The simulated calibration switch: a single-pole N-throw between the test port and the
// OPEN/SHORT/LOAD (and MISMATCH-A/B) standards or the DUT socket, directly (DUT) or through the
// offset line (DUT-OFFSET), driven by ROUTe:CLOSe (@n). Selecting a standard connects it in the
// World; DUT and DUT-OFFSET put back what the standard displaced. Pure, no I/O; single-threaded.
#pragma once

#include <map>
#include <optional>
#include <string>

#include <nlohmann/json_fwd.hpp>

namespace echoline::sim {

// The factory's settings (keys and defaults documented at make_switch_instrument).
struct SwitchConfig {
  std::string identity = "Echoline,SIM-SW,SW0001,1.0";
  std::map<int, std::string> positions{{1, "OPEN"}, {2, "SHORT"}, {3, "LOAD"}, {4, "DUT"}, {5, "MISMATCH-A"}, {6, "MISMATCH-B"}};
  // "load_return_loss_db": the LOAD's return loss; when given it replaces
  // World::standards.load_return_loss_db (the bench file's "standards" object) at creation.
  std::optional<double> load_return_loss_db;
};

// Throws std::invalid_argument naming the key ("positions" values must be DUT, DUT-OFFSET or a
// standard make_standard knows).
SwitchConfig switch_config_from_json(const nlohmann::json& config);

// "DUT" or "DUT-OFFSET": a position that connects the DUT socket rather than a standard.
bool is_dut_arm(const std::string& position);

}  // namespace echoline::sim
