// Ground truth of a simulated unit for the control port and the tests: the frequency of its
// true return-loss maximum (minimum |Gamma| of the DUT alone, no bench errors) and the depth
// there. Pure functions.
#pragma once

#include "simulator/physics/lot.hpp"

namespace echoline::sim {

// Frequency (Hz) of the return-loss maximum of `dut` inside [lo_hz, hi_hz]: a grid of 400
// steps, then a golden-section search in the two steps around the best grid point, to within
// `tolerance_hz`. REQUIRES: 0 < lo_hz < hi_hz; one maximum inside the range, or the largest
// grid point's neighbourhood is taken.
double return_loss_maximum_hz(const Dut& dut, double lo_hz, double hi_hz, double tolerance_hz = 100.0);

struct UnitTruth {
  double f0_hz;     // the return-loss maximum of the unit's antenna (make_unit_antenna)
  double depth_db;  // true_return_loss_db(unit, f0_hz): the unit as it is (a broken feed's
                    // is a fraction of a dB; an intermittent unit's is its good state)
};

// Series RLC: f0 is the series resonance antenna_f0_hz() exactly (|Gamma| of R + jX on
// 50 ohm with R fixed is least where X = 0). Wire monopole: found numerically
// (return_loss_maximum_hz, 100 Hz) within 0.5 .. 1.5 times the element's reactance zero.
UnitTruth unit_truth(const SimUnit& unit);

}  // namespace echoline::sim
