// The series-RLC antenna and broken feeds as reflection coefficients.
#include "simulator/physics/dut_models.hpp"

#include <cmath>
#include <numbers>
#include <stdexcept>
#include <string>

#include <fmt/format.h>

namespace echoline::sim {
namespace {

constexpr double kZ0 = 50.0;
constexpr double kTwoPi = 2.0 * std::numbers::pi;

class Antenna final : public Dut {
 public:
  explicit Antenna(const AntennaParams& p) : p_(p), rlc_(antenna_rlc(p)) {}
  Complex gamma(double f) const override {
    const double w = kTwoPi * f;
    const Complex z(rlc_.r_ohm, w * rlc_.l_henry - 1.0 / (w * rlc_.c_farad));
    return gamma_of_impedance(z, kZ0);
  }
  std::string describe() const override {
    return fmt::format("antenna, element {:.3f} mm, f0 {:.3f} MHz, R {:.1f} ohm, Q {:.1f}", p_.element_length_mm,
                       rlc_.f0_hz / 1e6, rlc_.r_ohm, p_.q);
  }

 private:
  AntennaParams p_;
  SeriesRlc rlc_;
};

// A broken feed: nearly total reflection everywhere; a feed stub gives a slow phase turn.
class BrokenFeed final : public Dut {
 public:
  BrokenFeed(bool open, double loss_db) : open_(open), rho_(std::pow(10.0, -loss_db / 20.0)), loss_db_(loss_db) {}
  Complex gamma(double f) const override {
    const double base = open_ ? 0.0 : std::numbers::pi;
    return std::polar(rho_, base - kTwoPi * f * 2.0 * kStubDelayS);
  }
  std::string describe() const override {
    return fmt::format("{} feed ({:.2f} dB return loss)", open_ ? "open" : "shorted", loss_db_);
  }

 private:
  static constexpr double kStubDelayS = 20e-12;  // ~6 mm of feed before the break
  bool open_;
  double rho_;
  double loss_db_;
};

}  // namespace

Complex gamma_of_impedance(Complex z_ohm, double z0_ohm) { return (z_ohm - z0_ohm) / (z_ohm + z0_ohm); }

double antenna_f0_hz(const AntennaParams& p) { return p.nominal_f0_hz * p.nominal_length_mm / p.element_length_mm; }

SeriesRlc antenna_rlc(const AntennaParams& p) {
  if (!(p.element_length_mm > 0) || !(p.nominal_length_mm > 0) || !(p.nominal_f0_hz > 0) || !(p.q > 0) ||
      !(p.resistance_ohm > 0) || !(p.extra_series_ohm >= 0)) {
    throw std::invalid_argument("antenna model: lengths, f0, Q and resistance must be > 0, extra series R >= 0");
  }
  const double f0 = antenna_f0_hz(p);
  const double w0 = kTwoPi * f0;
  return SeriesRlc{f0, p.resistance_ohm + p.extra_series_ohm, p.q * p.resistance_ohm / w0,
                   1.0 / (w0 * p.q * p.resistance_ohm)};
}

Complex antenna_impedance(const AntennaParams& p, double frequency_hz) {
  const SeriesRlc rlc = antenna_rlc(p);
  const double w = kTwoPi * frequency_hz;
  return {rlc.r_ohm, w * rlc.l_henry - 1.0 / (w * rlc.c_farad)};
}

std::unique_ptr<Dut> make_antenna(const AntennaParams& p) { return std::make_unique<Antenna>(p); }
std::unique_ptr<Dut> make_open_feed(double loss_db) { return std::make_unique<BrokenFeed>(true, loss_db); }
std::unique_ptr<Dut> make_shorted_feed(double loss_db) { return std::make_unique<BrokenFeed>(false, loss_db); }

}  // namespace echoline::sim
