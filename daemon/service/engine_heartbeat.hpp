// Proof that the sweep engine is alive, for the watchdog (watchdog.hpp): before each step the
// engine promises its next stamp within an allowance (the instrument timeouts the step may wait
// out); between sweeps it is idle and nothing in it can hang.
// Threading: every member is lock-free and safe from any thread.
#pragma once

#include <atomic>
#include <chrono>
#include <cstdint>

#include "drivers/scpi_session.hpp"

namespace echoline::service {

class EngineHeartbeat {
 public:
  using Clock = std::chrono::steady_clock;

  // The engine is working and will stamp again (beat or idle) within `allowance`.
  void beat(Clock::duration allowance);
  // The engine is not sweeping.
  void idle();
  // True when idle, or when the last beat's allowance has not run out at `now`.
  bool alive(Clock::time_point now = Clock::now()) const;
  // How far past its allowance the engine is at `now` (zero while alive).
  Clock::duration overdue(Clock::time_point now = Clock::now()) const;

 private:
  static constexpr std::int64_t kIdle = INT64_MAX;
  std::atomic<std::int64_t> deadline_ns_{kIdle};   // steady-clock time of the promised next stamp
};

// The daemon's one sweep engine (jobs run one at a time on one worker thread).
EngineHeartbeat& engine_heartbeat();

// Stamps the heartbeat idle when the sweep ends, on every way out.
class SweepHeartbeatScope {
 public:
  explicit SweepHeartbeatScope(EngineHeartbeat& heartbeat) : heartbeat_(heartbeat) {}
  ~SweepHeartbeatScope() { heartbeat_.idle(); }
  SweepHeartbeatScope(const SweepHeartbeatScope&) = delete;
  SweepHeartbeatScope& operator=(const SweepHeartbeatScope&) = delete;

 private:
  EngineHeartbeat& heartbeat_;
};

// The longest one engine step may legitimately block: `replies` replies and `opc_waits` *OPC?
// waits, each at the longer of the two instruments' timeouts, plus `extra_s` (settling) and a
// 2 s margin for scheduling on a loaded machine.
EngineHeartbeat::Clock::duration step_allowance(const drivers::SessionOptions& a, const drivers::SessionOptions& b,
                                                int replies, int opc_waits, double extra_s = 0);

}  // namespace echoline::service
