// World: the state shared by the simulated instruments of one bench (source tone, what is
// connected at the test port, the sim clock). Plain data, no I/O.
// Threading: single-threaded; only the server's one io thread touches a World.
#pragma once

#include <cmath>
#include <cstdint>
#include <memory>
#include <string>
#include <vector>

#include "simulator/physics/bench.hpp"
#include "simulator/physics/standards.hpp"

namespace echoline::sim {

struct Lot;  // simulator/physics/lot.hpp

struct World {
  BenchParams bench;                    // fixture between source, DUT and receiver
  StandardsParams standards;            // the OPEN/SHORT/LOAD that the switch and the control port
                                        // connect, and the offset line (standards.offset_line)

  // Source state as the receiver sees it (written by the source instrument).
  double source_frequency_hz = 915e6;   // CW frequency, Hz
  double source_power_dbm = -10;        // actual output level (setting + accuracy error), dBm
  bool source_output_on = false;        // RF output state
  double source_settled_at_s = 0;       // sim time (s) when the last change has settled;
                                        // the receiver sees the tone only when now_s >= this

  // Source sweep (FREQuency:MODE SWEep, written by the source instrument). While sweeping, the
  // tone moves linearly from start to stop in source_sweep_time_s, jumps back (instant
  // retrace) and repeats, for as long as the mode stays SWEep; the first sweep starts at
  // source_sweep_epoch_s (sim time, after settling). source_frequency_hz then holds the start.
  bool source_sweeping = false;
  double source_sweep_start_hz = 0;
  double source_sweep_stop_hz = 0;
  double source_sweep_time_s = 1;       // > 0
  double source_sweep_epoch_s = 0;

  // A cable from the source's ramp-start pulse output to the receiver's external trigger input
  // (the sim config's "trigger_cable"). Without it a receiver set to trigger externally waits
  // for ever. The pulse reaches the receiver trigger_latency_s after a ramp starts, give or take
  // trigger_jitter_s (uniform), the pulse output's and the trigger input's delays together.
  bool trigger_cable = false;
  double trigger_latency_s = 0;
  double trigger_jitter_s = 0;

  // The start of the first ramp at or after time t (the first ramp when t is before it).
  double next_ramp_start_at(double t) const {
    if (t <= source_sweep_epoch_s) return source_sweep_epoch_s;
    const double k = std::ceil((t - source_sweep_epoch_s) / source_sweep_time_s);
    return source_sweep_epoch_s + k * source_sweep_time_s;
  }

  // The source tone frequency at sim time t (the CW frequency when not sweeping, the start
  // before the first sweep begins).
  double source_frequency_at(double t) const {
    if (!source_sweeping || t <= source_sweep_epoch_s) return source_sweeping ? source_sweep_start_hz : source_frequency_hz;
    const double phase = (t - source_sweep_epoch_s) / source_sweep_time_s;
    return source_sweep_start_hz + (source_sweep_stop_hz - source_sweep_start_hz) * (phase - std::floor(phase));
  }

  // What sits at the test port. nullptr = nothing connected: the unterminated port
  // reflects like an OPEN (the receiver models it so).
  std::unique_ptr<Dut> connected;
  std::string connected_name;           // "OPEN", "SHORT", "LOAD", "MISMATCH-A", "MISMATCH-B", a unit serial, or ""
  // true: `connected` sits behind standards.offset_line (the switch's DUT-OFFSET arm, or a
  // control-port connect with "via":"offset-line"); with nothing connected the line's far end
  // is open. Every other connection (a standard, DUT, disconnect) sets it false.
  bool via_offset_line = false;
  const Lot* lot = nullptr;             // the loaded lot, if any (owned by the server)

  std::uint64_t sweep_counter = 0;      // incremented by the receiver at each INIT
  // Per bin of the receiver's last sweep under a swept source: the source frequency at which the
  // bin saw the tone (NaN: not seen). Empty after a sweep under a CW source. For the control
  // port's "last-sweep" (test ground truth); no instrument reads it.
  std::vector<double> last_sweep_tone_hz;
  double now_s = 0;                     // sim clock (s); set by the server before each message
};

}  // namespace echoline::sim
