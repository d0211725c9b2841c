// The OPEN, SHORT and LOAD calibration standards as reflection coefficients, with the
// imperfections a bench file can set ("standards" in config/sim/*.jsonc). Pure functions of
// frequency; each Dut is immutable.
#pragma once

#include <memory>

#include "simulator/physics/bench.hpp"

namespace echoline::sim {

// Every field has the default of the "standards" object in the bench file.
struct StandardsParams {
  double open_gamma_magnitude = 0.998;    // |Gamma| of the OPEN (its loss)
  double open_capacitance_ff = 10;        // fringing capacitance of the open end, fF
  double short_gamma_magnitude = 0.998;   // |Gamma| of the SHORT
  double short_inductance_ph = 10;        // series inductance of the short, pH
  double load_return_loss_db = 42;        // return loss of the LOAD at 1 GHz, dB
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

}  // namespace echoline::sim
