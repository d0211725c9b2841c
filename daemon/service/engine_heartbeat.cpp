// The engine's heartbeat: one atomic deadline on the steady clock.
#include "daemon/service/engine_heartbeat.hpp"

#include <algorithm>

namespace echoline::service {
namespace {

std::int64_t ticks(EngineHeartbeat::Clock::time_point t) {
  return std::chrono::duration_cast<std::chrono::nanoseconds>(t.time_since_epoch()).count();
}

}  // namespace

void EngineHeartbeat::beat(Clock::duration allowance) {
  deadline_ns_.store(ticks(Clock::now() + allowance), std::memory_order_release);
}

void EngineHeartbeat::idle() { deadline_ns_.store(kIdle, std::memory_order_release); }

bool EngineHeartbeat::alive(Clock::time_point now) const {
  return ticks(now) <= deadline_ns_.load(std::memory_order_acquire);
}

EngineHeartbeat::Clock::duration EngineHeartbeat::overdue(Clock::time_point now) const {
  const std::int64_t deadline = deadline_ns_.load(std::memory_order_acquire);
  if (deadline == kIdle || ticks(now) <= deadline) return Clock::duration::zero();
  return std::chrono::duration_cast<Clock::duration>(std::chrono::nanoseconds(ticks(now) - deadline));
}

EngineHeartbeat& engine_heartbeat() {
  static EngineHeartbeat heartbeat;
  return heartbeat;
}

EngineHeartbeat::Clock::duration step_allowance(const drivers::SessionOptions& a, const drivers::SessionOptions& b,
                                                int replies, int opc_waits, double extra_s) {
  using std::chrono::duration_cast;
  const auto reply = std::max(a.timeout, b.timeout);
  const auto opc = std::max(a.opc_timeout, b.opc_timeout);
  const auto extra = duration_cast<EngineHeartbeat::Clock::duration>(std::chrono::duration<double>(std::max(0.0, extra_s)));
  return duration_cast<EngineHeartbeat::Clock::duration>(reply * std::max(0, replies) + opc * std::max(0, opc_waits)) +
         extra + std::chrono::seconds(2);
}

}  // namespace echoline::service
