// The systemd watchdog (WatchdogSec=): a thread sends WATCHDOG=1 at half the period only while
// the sweep engine's heartbeat holds. A hung engine, RF possibly ON, stops the pings; systemd
// kills the daemon, runs ExecStopPost (echolined --rf-off) and restarts it.
// Threading: the notifier owns its thread; construct and destroy it on one thread.
#pragma once

#include <chrono>
#include <condition_variable>
#include <mutex>
#include <optional>
#include <thread>

#include "daemon/service/engine_heartbeat.hpp"

namespace echoline::service {

// The watchdog period the service manager asked for: $WATCHDOG_USEC, when $WATCHDOG_PID is
// unset or names this process. nullopt when there is none (not under a watchdog) or when the
// value is not a positive whole number.
std::optional<std::chrono::microseconds> watchdog_period_from_environment();

class WatchdogNotifier {
 public:
  // Starts pinging at period / 2. REQUIRES: heartbeat outlives the notifier.
  WatchdogNotifier(const EngineHeartbeat& heartbeat, std::chrono::microseconds period);
  ~WatchdogNotifier();   // stops and joins the thread
  WatchdogNotifier(const WatchdogNotifier&) = delete;
  WatchdogNotifier& operator=(const WatchdogNotifier&) = delete;

 private:
  void loop();

  const EngineHeartbeat& heartbeat_;
  const std::chrono::microseconds interval_;
  std::mutex mu_;
  std::condition_variable wake_;
  bool stop_ = false;
  std::thread thread_;   // last: starts after every member above exists
};

}  // namespace echoline::service
