// The bench's wave model: source -> coupler main line -> cable -> DUT and back to the
// coupled port, plus the coupler's directivity leakage, summed as complex waves.
#include "simulator/physics/bench.hpp"

#include <cmath>
#include <numbers>

namespace echoline::sim {
namespace {

constexpr double kBoltzmann = 1.380649e-23;  // J/K, exact since the 2019 SI redefinition

// Voltage-wave factor of a loss or gain given in dB (power).
double amplitude_of_db(double db) { return std::pow(10.0, db / 20.0); }

// exp(-j*2*pi*f*tau): the phase a wave picks up travelling for tau seconds.
Complex delay_phasor(double frequency_hz, double delay_s) {
  return std::polar(1.0, -2.0 * std::numbers::pi * frequency_hz * delay_s);
}

}  // namespace

double dbm_to_watts(double dbm) { return 1e-3 * std::pow(10.0, dbm / 10.0); }

double watts_to_dbm(double watts) { return 10.0 * std::log10(watts / 1e-3); }

// Reference plane for "a": the main-line output of the coupler (after its insertion loss).
// A full reflection there returns to the coupled port at a * 10^(-coupling/20); the leakage
// sits `directivity_db` below that. The cable then lowers the effective directivity seen at
// the test port by twice its loss, as on a real bench.
Complex coupled_wave(const BenchParams& bench, const Dut& dut, double frequency_hz, double source_dbm) {
  const double a_source = std::sqrt(dbm_to_watts(source_dbm));
  const Complex a_coupler = a_source * amplitude_of_db(-bench.mainline_loss_db);

  const double cable_delay_s = bench.cable_delay_ns * 1e-9;
  const Complex cable_one_way = amplitude_of_db(-bench.cable_loss_db) * delay_phasor(frequency_hz, cable_delay_s);
  const Complex a_port = a_coupler * cable_one_way;

  // Source match seen from the test port: the test-side mismatch, its phase turning with the
  // cable's round trip. Re-reflections between it and the DUT sum to Gamma / (1 - Gamma_S*Gamma).
  const Complex gamma = dut.gamma(frequency_hz);
  const Complex gamma_s = amplitude_of_db(-bench.source_match_db) * delay_phasor(frequency_hz, 2.0 * cable_delay_s);
  const Complex gamma_eff = gamma / (1.0 - gamma_s * gamma);

  const Complex b_port = gamma_eff * a_port;
  const Complex b_coupler = b_port * cable_one_way;
  const Complex reflected = b_coupler * amplitude_of_db(-bench.coupling_db);

  const Complex leakage = a_coupler * amplitude_of_db(-(bench.coupling_db + bench.directivity_db)) *
                          delay_phasor(frequency_hz, bench.directivity_delay_ns * 1e-9);
  return reflected + leakage;
}

double coupled_power_dbm(const BenchParams& bench, const Dut& dut, double frequency_hz, double source_dbm) {
  return watts_to_dbm(std::norm(coupled_wave(bench, dut, frequency_hz, source_dbm)));
}

double noise_floor_dbm(double rbw_hz, double noise_figure_db, double temperature_k) {
  return watts_to_dbm(kBoltzmann * temperature_k * rbw_hz) + noise_figure_db;
}

}  // namespace echoline::sim
