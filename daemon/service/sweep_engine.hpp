// The step sweep engine: executes a recipe's frequency plan through the source and receiver
// drivers and returns the raw readings. The only code that touches instruments during a run.
// Threading: run() is synchronous, called from one worker thread; inside it a helper thread
// drives the source session while the caller's thread reads the receiver (never the same
// session on two threads). cancel may be set from any thread.
// Safety: the source output is switched OFF at the end and on every abort path. Before each
// step the engine stamps its heartbeat (engine_heartbeat.hpp) for the watchdog.
#pragma once

#include <atomic>
#include <functional>
#include <optional>
#include <string>
#include <vector>

#include "daemon/core/recipe.hpp"
#include "daemon/core/run_result.hpp"
#include "daemon/service/engine_heartbeat.hpp"
#include "drivers/receiver.hpp"
#include "drivers/result.hpp"
#include "drivers/source.hpp"

namespace echoline::service {

// Point i (1-based) of n has been measured.
using ProgressFn = std::function<void(int point, int of)>;

struct SweepOutcome {
  std::vector<core::Reading> readings;   // every point measured so far (all of them when completed)
  std::optional<Error> error;            // set when the sweep did not complete (aborted)
  double sweep_s = 0;                    // wall time from first command to output off
  bool completed() const { return !error.has_value(); }
};

struct SweepOptions {
  double coupling_db = 20;   // fixture coupling: worst-case receiver input = power - coupling (full reflection)
  bool send_setup = true;    // send the recipe's setup lines for each role before the sweep
  // Stamped before every step and set idle at the end (the watchdog's proof of progress).
  EngineHeartbeat* heartbeat = &engine_heartbeat();
};

class SweepEngine {
 public:
  // REQUIRES: source and receiver outlive the engine.
  SweepEngine(drivers::Source& source, drivers::Receiver& receiver, SweepOptions options = {});
  SweepEngine(const SweepEngine&) = delete;
  SweepEngine& operator=(const SweepEngine&) = delete;

  // Runs the recipe's plan. Never throws; an instrument error, a timeout or cancellation ends
  // the sweep with `error` set (message names instrument, command and what happened).
  SweepOutcome run(const core::Recipe& recipe, const std::atomic<bool>& cancel, const ProgressFn& progress = {});

  // Refuses a recipe whose worst-case power at the receiver could exceed its safe input level.
  Status check_safe(const core::Recipe& recipe) const;

 private:
  Status configure(const core::Recipe& recipe);
  Status source_move(double frequency_hz);     // "set frequency;*OPC?" [, errors when each-step]
  Status receiver_sweep(std::optional<double> center_hz);   // "[center;]INIT:IMM;*OPC?" as one message
  Result<double> receiver_peak();              // marker peak and Y? in one program message
  void output_off_best_effort();

  drivers::Source& source_;
  drivers::Receiver& receiver_;
  SweepOptions options_;
};

// Mean of dBm readings taken in linear power (mW), back in dBm. REQUIRES: non-empty.
double average_dbm(const std::vector<double>& dbm);

}  // namespace echoline::service
