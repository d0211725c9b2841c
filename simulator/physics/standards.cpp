// OPEN, SHORT and LOAD standards with their loss, fringing capacitance, series inductance and
// return loss, and the mismatch standards with their true |Gamma|, phase and offset, taken from
// StandardsParams.
#include "simulator/physics/standards.hpp"

#include <algorithm>
#include <cmath>
#include <numbers>
#include <string>

#include <fmt/format.h>

#include "simulator/physics/dut_models.hpp"

namespace echoline::sim {
namespace {

constexpr double kZ0 = 50.0;
constexpr double kTwoPi = 2.0 * std::numbers::pi;

// An open end with fringing capacitance C: |Gamma| = rho, phase -2*atan(w*C*Z0).
class OpenStandard final : public Dut {
 public:
  OpenStandard(double rho, double farad) : rho_(rho), farad_(farad) {}
  Complex gamma(double f) const override {
    if (farad_ <= 0) return rho_;
    return rho_ * gamma_of_impedance(1.0 / Complex(0.0, kTwoPi * f * farad_), kZ0);
  }
  std::string describe() const override {
    return fmt::format("OPEN standard (|Gamma| {:.4f}, {:.1f} fF fringing)", rho_, farad_ * 1e15);
  }

 private:
  double rho_;
  double farad_;
};

// A short with a little series inductance L: |Gamma| = rho, phase pi - 2*atan(w*L/Z0).
class ShortStandard final : public Dut {
 public:
  ShortStandard(double rho, double henry) : rho_(rho), henry_(henry) {}
  Complex gamma(double f) const override { return rho_ * gamma_of_impedance(Complex(0.0, kTwoPi * f * henry_), kZ0); }
  std::string describe() const override {
    return fmt::format("SHORT standard (|Gamma| {:.4f}, {:.1f} pH)", rho_, henry_ * 1e12);
  }

 private:
  double rho_;
  double henry_;
};

// A good termination whose match degrades slowly with frequency (|Gamma| grows 10 % per GHz
// above 1 GHz), phase near +90 degrees (residual inductance).
class LoadStandard final : public Dut {
 public:
  explicit LoadStandard(double return_loss_db) : rl_db_(return_loss_db), rho_1ghz_(std::pow(10.0, -return_loss_db / 20.0)) {}
  Complex gamma(double f) const override {
    const double slope = std::max(0.5, 1.0 + 0.1 * (f / 1e9 - 1.0));
    return std::polar(rho_1ghz_ * slope, std::numbers::pi / 2.0 - kTwoPi * f * 15e-12);
  }
  std::string describe() const override { return fmt::format("LOAD standard ({:.1f} dB at 1 GHz)", rl_db_); }

 private:
  double rl_db_;
  double rho_1ghz_;
};

// A termination other than Z0 behind a lossless offset line of delay tau (one way).
class MismatchStandard final : public Dut {
 public:
  MismatchStandard(std::string name, const MismatchParams& m) : name_(std::move(name)), m_(m) {}
  Complex gamma(double f) const override {
    return std::polar(m_.magnitude, m_.phase_deg * std::numbers::pi / 180.0 - 2.0 * kTwoPi * f * m_.offset_delay_ps * 1e-12);
  }
  std::string describe() const override {
    return fmt::format("{} standard (|Gamma| {:.4f} at {:.2f} degrees, {:.1f} ps offset)", name_, m_.magnitude, m_.phase_deg,
                       m_.offset_delay_ps);
  }

 private:
  std::string name_;
  MismatchParams m_;
};

}  // namespace

std::unique_ptr<Dut> make_mismatch(const std::string& name, const MismatchParams& m) {
  return std::make_unique<MismatchStandard>(name, m);
}

std::unique_ptr<Dut> make_standard(const std::string& name, const StandardsParams& s) {
  if (name == "OPEN") return make_open(s);
  if (name == "SHORT") return make_short(s);
  if (name == "LOAD") return make_load(s);
  if (name == "MISMATCH-A") return make_mismatch(name, s.mismatch_a);
  if (name == "MISMATCH-B") return make_mismatch(name, s.mismatch_b);
  return nullptr;
}

const char* standard_names() { return "OPEN, SHORT, LOAD, MISMATCH-A, MISMATCH-B"; }

std::unique_ptr<Dut> make_open(const StandardsParams& s) {
  return std::make_unique<OpenStandard>(s.open_gamma_magnitude, s.open_capacitance_ff * 1e-15);
}
std::unique_ptr<Dut> make_short(const StandardsParams& s) {
  return std::make_unique<ShortStandard>(s.short_gamma_magnitude, s.short_inductance_ph * 1e-12);
}
std::unique_ptr<Dut> make_load(const StandardsParams& s) { return std::make_unique<LoadStandard>(s.load_return_loss_db); }
std::unique_ptr<Dut> make_load(double return_loss_db) { return std::make_unique<LoadStandard>(return_loss_db); }

}  // namespace echoline::sim
