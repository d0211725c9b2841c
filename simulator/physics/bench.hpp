// The simulated bench, physics only: source -> coupler main line -> cable -> test port <- DUT,
// reflected wave back through cable and coupler to the coupled port -> receiver input.
// Complex waves throughout (no dB shortcuts). Pure functions; no SCPI, no sockets, no clock.
// Shares no code with the daemon's analysis (see DEVELOPERS.md).
#pragma once

#include <complex>
#include <cstdint>
#include <memory>
#include <string>

namespace echoline::sim {

using Complex = std::complex<double>;

// The fixed parts of the bench between source and DUT and between DUT and receiver.
struct BenchParams {
  double coupling_db = 20;           // coupled-port level below the main line
  double mainline_loss_db = 0.5;     // coupler insertion loss, source -> test side
  double directivity_db = 35;        // leakage below the coupled level of a full reflection
  double directivity_delay_ns = 1.5; // phase of the leakage turns with frequency (2*pi*f*delay)
  double cable_delay_ns = 2.0;       // one way, coupler to test port
  double cable_loss_db = 0.3;        // one way
  double source_match_db = 25;       // test-port match seen by the DUT (re-reflection)
  double reference_impedance_ohm = 50;
};

// Anything that can sit at the test port: a standard, an antenna, a defect.
class Dut {
 public:
  virtual ~Dut() = default;
  // Reflection coefficient at the test port at frequency f (Hz), referenced to 50 ohm.
  virtual Complex gamma(double frequency_hz) const = 0;
  virtual std::string describe() const = 0;
  // Called by the instrument before each sweep; models that change over time (an intermittent
  // feed) update here. Default: no change.
  virtual void on_sweep(std::uint64_t sweep_index) { (void)sweep_index; }
};

// Complex wave (sqrt(W) units, phase in radians) arriving at the receiver input for a
// source CW tone of `source_dbm` at `frequency_hz`, DUT `dut` at the test port.
Complex coupled_wave(const BenchParams& bench, const Dut& dut, double frequency_hz, double source_dbm);

// The same as power in dBm.
double coupled_power_dbm(const BenchParams& bench, const Dut& dut, double frequency_hz, double source_dbm);

// Receiver noise floor: kTB at `temperature_k` in `rbw_hz`, plus noise figure, in dBm.
double noise_floor_dbm(double rbw_hz, double noise_figure_db, double temperature_k = 290.0);

// Wave/power helpers.
double dbm_to_watts(double dbm);
double watts_to_dbm(double watts);

}  // namespace echoline::sim
