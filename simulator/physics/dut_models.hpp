// Models of what can sit at the simulated test port: a series-RLC antenna around its
// resonance and broken feeds (the standards are in standards.hpp, the wire monopole in
// wire_monopole.hpp). Pure functions of frequency; a Dut is immutable after construction
// except for on_sweep() (intermittent units), called from one thread.
#pragma once

#include <memory>

#include "simulator/physics/bench.hpp"
#include "simulator/physics/standards.hpp"

namespace echoline::sim {

// A series RLC around resonance: Z = R + extra + j(wL - 1/(wC)), L = Q*R/w0, C = 1/(w0*Q*R).
struct AntennaParams {
  double element_length_mm = 0;  // this unit's radiating element
  double nominal_length_mm = 0;  // the design length
  double nominal_f0_hz = 0;      // resonance of an element of nominal length
  double q = 0;                  // loaded Q at resonance (uses resistance_ohm)
  double resistance_ohm = 0;     // radiation + loss resistance at resonance
  double extra_series_ohm = 0;   // corrosion / lossy joint, added in series
};

// REQUIRES: all lengths, f0, q and resistance_ohm > 0; extra_series_ohm >= 0 (a violation is a
// bug in the caller: std::invalid_argument; load_lot() checks lot files before building units).
// f0 of this unit = nominal_f0 * nominal_length / element_length (f proportional to 1/length).
std::unique_ptr<Dut> make_antenna(const AntennaParams&);

// Resonance of the unit described by `p` (Hz).
double antenna_f0_hz(const AntennaParams& p);

// The lumped elements behind make_antenna(): L = Q*R/w0, C = 1/(w0*Q*R), R = resistance_ohm.
struct SeriesRlc {
  double f0_hz;
  double r_ohm;          // resistance_ohm + extra_series_ohm
  double l_henry;
  double c_farad;
};
SeriesRlc antenna_rlc(const AntennaParams& p);

// Input impedance of the antenna model at f (ohm).
Complex antenna_impedance(const AntennaParams& p, double frequency_hz);

// Gamma = (Z - Z0) / (Z + Z0).
Complex gamma_of_impedance(Complex z_ohm, double z0_ohm = 50.0);

// A broken feed: Gamma close to +1 (open) or -1 (shorted) across the band, `loss_db` of return loss.
std::unique_ptr<Dut> make_open_feed(double loss_db = 0.2);
std::unique_ptr<Dut> make_shorted_feed(double loss_db = 0.2);

}  // namespace echoline::sim
