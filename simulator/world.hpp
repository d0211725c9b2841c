// World: the state shared by the simulated instruments of one bench (source tone, what is
// connected at the test port, the sim clock). Plain data, no I/O.
// Threading: single-threaded; only the server's one io thread touches a World.
#pragma once

#include <cstdint>
#include <memory>
#include <string>

#include "simulator/physics/bench.hpp"

namespace echoline::sim {

struct Lot;  // simulator/physics/lot.hpp

struct World {
  BenchParams bench;                    // fixture between source, DUT and receiver

  // Source state as the receiver sees it (written by the source instrument).
  double source_frequency_hz = 915e6;   // CW frequency, Hz
  double source_power_dbm = -10;        // actual output level (setting + accuracy error), dBm
  bool source_output_on = false;        // RF output state
  double source_settled_at_s = 0;       // sim time (s) when the last change has settled;
                                        // the receiver sees the tone only when now_s >= this

  // What sits at the test port. nullptr = nothing connected: the unterminated port
  // reflects like an OPEN (the receiver models it so).
  std::unique_ptr<Dut> connected;
  std::string connected_name;           // "OPEN", "SHORT", "LOAD", a unit serial, or ""
  const Lot* lot = nullptr;             // the loaded lot, if any (owned by the server)

  std::uint64_t sweep_counter = 0;      // incremented by the receiver at each INIT
  double now_s = 0;                     // sim clock (s); set by the server before each message
};

}  // namespace echoline::sim
