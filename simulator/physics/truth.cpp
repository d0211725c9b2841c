// The return-loss maximum of a unit: closed form for the series RLC, grid plus golden-section
// search for the wire monopole.
#include "simulator/physics/truth.hpp"

#include <algorithm>
#include <cmath>
#include <stdexcept>

namespace echoline::sim {
namespace {

constexpr int kGridSteps = 400;

}  // namespace

double return_loss_maximum_hz(const Dut& dut, double lo_hz, double hi_hz, double tolerance_hz) {
  if (!(lo_hz > 0) || !(hi_hz > lo_hz) || !(tolerance_hz > 0)) {
    throw std::invalid_argument("return_loss_maximum_hz: needs 0 < lo < hi and tolerance > 0");
  }
  auto rho = [&dut](double f) { return std::abs(dut.gamma(f)); };
  const double step = (hi_hz - lo_hz) / kGridSteps;
  int best = 0;
  double best_rho = rho(lo_hz);
  for (int i = 1; i <= kGridSteps; ++i) {
    const double r = rho(lo_hz + step * i);
    if (r < best_rho) {
      best_rho = r;
      best = i;
    }
  }
  // Golden-section search for the least |Gamma| in [a, b] (Kiefer 1953).
  double a = lo_hz + step * std::max(best - 1, 0);
  double b = lo_hz + step * std::min(best + 1, kGridSteps);
  const double inv_phi = (std::sqrt(5.0) - 1.0) / 2.0;
  double c = b - inv_phi * (b - a);
  double d = a + inv_phi * (b - a);
  double rc = rho(c);
  double rd = rho(d);
  while (b - a > tolerance_hz) {
    if (rc < rd) {
      b = d;
      d = c;
      rd = rc;
      c = b - inv_phi * (b - a);
      rc = rho(c);
    } else {
      a = c;
      c = d;
      rc = rd;
      d = a + inv_phi * (b - a);
      rd = rho(d);
    }
  }
  return 0.5 * (a + b);
}

UnitTruth unit_truth(const SimUnit& unit) {
  double f0 = 0;
  if (unit.model == AntennaModel::wire_monopole) {
    const double x0 = wire_monopole_reactance_zero_hz(unit.wire);
    f0 = return_loss_maximum_hz(*make_unit_antenna(unit), 0.5 * x0, 1.5 * x0);
  } else {
    f0 = antenna_f0_hz(unit.antenna);
  }
  return UnitTruth{f0, true_return_loss_db(unit, f0)};
}

}  // namespace echoline::sim
