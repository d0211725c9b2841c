// Checks a recipe against what the station can do: equipment safety (receiver maximum safe
// input), frequency ranges, and whether the station can verify the limits (directivity, noise).
// Pure; thread-safe.
#pragma once

#include <set>
#include <string>
#include <vector>

#include "daemon/core/cal_kit.hpp"
#include "daemon/core/recipe.hpp"

namespace echoline::core {

struct CheckFinding {
  std::string severity;  // "error" | "warning"
  std::string key;       // recipe key path the finding is about, e.g. "/source/power_dbm"
  std::string message;
};

// What the station's instruments and fixture can do (from profiles and station config).
struct StationCapability {
  double directivity_db = 30;         // effective coupler directivity (nominal or calibrated)
  double source_match_db = 25;        // effective test-port match
  double coupling_db = 20;            // coupler coupling factor (source -> test port path to receiver)
  double mainline_loss_db = 0.5;
  double cable_loss_db = 0.3;         // one way, test-port cable
  double noise_floor_dbm = -110;      // receiver displayed noise floor AT THE RECIPE'S RBW
                                      // (thermal_noise_floor_dbm(rbw, NF) from rf_math.hpp)
  double receiver_max_safe_input_dbm = 20;
  double source_min_hz = 0, source_max_hz = 0;
  double receiver_min_hz = 0, receiver_max_hz = 0;
  double source_max_power_dbm = 0;
  CalKit kit = builtin_conservative_kit();  // the standards the station calibrates with
  std::string fast_capture_problem;  // fast-capture mode: why no plan meets the recipe's limits ("" = planned)
  std::string start_pulse_problem;   // fast-capture mode: why the start-pulse cable is not used ("" = used or absent)
  double frequency_offset_hz = 0;    // fast-capture mode: the planned capture's offset bound (0 = step sweep)
  double test_port_delay_s = 5e-9;   // one-way electrical delay coupler -> test port (error-term rotation)
  // Profile operations the instruments lack (declared absent, or optional and left out), and the
  // profiles' names for messages. Empty: every operation is there.
  std::set<std::string> source_lacks, receiver_lacks;
  std::string source_profile = "source", receiver_profile = "receiver";
  // A calibration switch, when the station has one: the standards its profile has positions for.
  bool has_switch = false;
  std::set<std::string> switch_positions;
  std::string switch_profile = "switch";
  // The offset pair without a switch arm for it: the operator fits the kit's offset line for
  // each unit's second reading. kit.offset_line->match then holds the kit's figure plus the
  // line's connection, made anew each time (k·u_conn), and kit_line_match the kit's own figure.
  bool offset_line_by_hand = false;
  double kit_line_match = 0;
};

// Findings in recipe order; any "error" means the recipe must not run on this station.
std::vector<CheckFinding> check_recipe(const Recipe& recipe, const StationCapability& station);

// Worst-case power at the receiver input for a source power (the model of MEASUREMENT.md §1):
//   P = P_src − coupling + 20·log10(1 + 10^(−D/20))
// full reflection at the test port, directivity leakage adding in phase, losses ignored
// (they only lower the level, so ignoring them is the worst case).
double worst_case_receiver_dbm(double source_power_dbm, const StationCapability& station);

// Expected level of a full reflector (OPEN/SHORT) at the receiver:
//   P_src − coupling − mainline loss − 2·cable loss.
double expected_reflection_dbm(double source_power_dbm, const StationCapability& station);

bool has_errors(const std::vector<CheckFinding>& findings);

}  // namespace echoline::core
