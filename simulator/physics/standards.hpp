// The OPEN, SHORT, LOAD and the two mismatch calibration standards (MISMATCH-A, MISMATCH-B) as
// reflection coefficients, with the imperfections and true values a bench file can set
// ("standards" in config/sim/*.jsonc; it also holds the offset line). Pure; each Dut is immutable.
#pragma once

#include <memory>
#include <string>

#include "simulator/physics/bench.hpp"
#include "simulator/physics/offset_line.hpp"

namespace echoline::sim {

// A known mismatch's TRUE value: Gamma = magnitude * e^(j phase) * e^(-j 2 w offset_delay).
struct MismatchParams {
  double magnitude = 0.1;                 // |Gamma| at its own plane
  double phase_deg = 0;                   // phase at its own plane, degrees
  double offset_delay_ps = 0;             // one-way delay of its offset line, ps
};

// Every field has the default of the "standards" object in the bench file.
struct StandardsParams {
  double open_gamma_magnitude = 0.998;    // |Gamma| of the OPEN (its loss)
  double open_capacitance_ff = 10;        // fringing capacitance of the open end, fF
  double short_gamma_magnitude = 0.998;   // |Gamma| of the SHORT
  double short_inductance_ph = 10;        // series inductance of the short, pH
  double load_return_loss_db = 42;        // return loss of the LOAD at 1 GHz, dB
  // The mismatch standards as built: near a 61.1 ohm termination (|Gamma| 0.1), at the port and
  // behind about an eighth wave at 915 MHz; close to, never exactly, what a kit file would say.
  MismatchParams mismatch_a{0.1013, 0.6, 0};
  MismatchParams mismatch_b{0.0989, -0.4, 137.5};
  // The line of the switch's DUT-OFFSET arm (and of a control-port connect "via":"offset-line").
  OffsetLineParams offset_line;
};

// OPEN: Gamma = rho_open * (Z - Z0)/(Z + Z0), Z = 1/(j w C): phase -2 atan(w C Z0).
std::unique_ptr<Dut> make_open(const StandardsParams& s = {});
// SHORT: Gamma = rho_short * (Z - Z0)/(Z + Z0), Z = j w L: phase pi - 2 atan(w L / Z0).
std::unique_ptr<Dut> make_short(const StandardsParams& s = {});
// LOAD: |Gamma| = 10^(-load_return_loss_db/20) at 1 GHz, growing 10 % per GHz above
// (never below half of it), phase near +90 degrees turning with 15 ps (residual inductance).
std::unique_ptr<Dut> make_load(const StandardsParams& s = {});
// The same LOAD with only its return loss given (the other fields at their defaults).
std::unique_ptr<Dut> make_load(double return_loss_db);
// A mismatch standard: Gamma = magnitude * e^(j phase) * e^(-j 2 w offset_delay).
std::unique_ptr<Dut> make_mismatch(const std::string& name, const MismatchParams& m);

// The standard of that name ("OPEN", "SHORT", "LOAD", "MISMATCH-A", "MISMATCH-B"), or nullptr.
std::unique_ptr<Dut> make_standard(const std::string& name, const StandardsParams& s = {});
// The names make_standard knows, for messages: "OPEN, SHORT, LOAD, MISMATCH-A, MISMATCH-B".
const char* standard_names();

}  // namespace echoline::sim
