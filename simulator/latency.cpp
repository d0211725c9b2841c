#include "simulator/latency.hpp"

#include <algorithm>

namespace echoline::sim {

std::optional<LatencyProfile> latency_profile(std::string_view name) {
  LatencyProfile p;
  if (name == "instant") {
    p.name = "instant";
    p.instant = true;
    p.command_s = 0;
    return p;
  }
  if (name == "bench") {
    p.name = "bench";
    p.instant = false;
    return p;
  }
  return std::nullopt;
}

double reply_wait_s(const LatencyProfile& profile, double modelled_s) {
  if (profile.instant) return 0;
  return profile.command_s + std::max(0.0, modelled_s) * profile.delay_scale;
}

SimClock::SimClock(const LatencyProfile& profile)
    : instant_(profile.instant), step_s_(profile.instant_step_s), start_(std::chrono::steady_clock::now()) {}

double SimClock::next_message_time() {
  if (instant_) {
    virtual_s_ += step_s_;
    return virtual_s_;
  }
  return now();
}

void SimClock::waited(double modelled_s) {
  if (instant_) virtual_s_ += std::max(0.0, modelled_s);
}

double SimClock::now() const {
  if (instant_) return virtual_s_;
  return std::chrono::duration<double>(std::chrono::steady_clock::now() - start_).count();
}

}  // namespace echoline::sim
