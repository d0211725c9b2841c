// Watchdog pings gated by the engine heartbeat; one log line when they stop and when they resume.
#include "daemon/service/watchdog.hpp"

#include <unistd.h>

#include <charconv>
#include <cstdlib>
#include <string_view>

#include <spdlog/spdlog.h>

#include "daemon/service/sd_notify.hpp"

namespace echoline::service {
namespace {

std::optional<long long> positive_number(const char* text) {
  if (text == nullptr || *text == '\0') return std::nullopt;
  const std::string_view s(text);
  long long value = 0;
  auto [end, ec] = std::from_chars(s.data(), s.data() + s.size(), value);
  if (ec != std::errc() || end != s.data() + s.size() || value <= 0) return std::nullopt;
  return value;
}

}  // namespace

std::optional<std::chrono::microseconds> watchdog_period_from_environment() {
  const auto usec = positive_number(std::getenv("WATCHDOG_USEC"));
  if (!usec) return std::nullopt;
  if (const char* pid_text = std::getenv("WATCHDOG_PID"); pid_text != nullptr && *pid_text != '\0') {
    const auto pid = positive_number(pid_text);
    if (!pid || *pid != static_cast<long long>(::getpid())) return std::nullopt;
  }
  return std::chrono::microseconds(*usec);
}

WatchdogNotifier::WatchdogNotifier(const EngineHeartbeat& heartbeat, std::chrono::microseconds period)
    : heartbeat_(heartbeat),
      interval_(std::max(std::chrono::microseconds(1000), period / 2)),
      thread_([this] { loop(); }) {}

WatchdogNotifier::~WatchdogNotifier() {
  {
    std::lock_guard lock(mu_);
    stop_ = true;
  }
  wake_.notify_all();
  thread_.join();
}

void WatchdogNotifier::loop() {
  bool pinging = true;
  std::unique_lock lock(mu_);
  while (!stop_) {
    if (heartbeat_.alive()) {
      if (!pinging) spdlog::warn("watchdog: the sweep engine is making progress again; pings resume");
      pinging = true;
      sd_notify_state("WATCHDOG=1");
    } else if (pinging) {
      pinging = false;
      const double overdue_s = std::chrono::duration<double>(heartbeat_.overdue()).count();
      // SAFETY: the source may be transmitting. Without pings the service manager kills the
      // daemon and runs ExecStopPost (--rf-off), which switches it off.
      spdlog::error("watchdog: the sweep engine has made no progress for {:.1f} s beyond its instrument timeouts; "
                    "watchdog pings stop so the service manager restarts the daemon and switches RF off",
                    overdue_s);
    }
    wake_.wait_for(lock, interval_, [&] { return stop_; });
  }
}

}  // namespace echoline::service
