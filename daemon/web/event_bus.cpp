// The ring of live events the page streams read.
#include "daemon/web/event_bus.hpp"

namespace echoline::web {

void EventBus::publish(std::string data) {
  {
    std::lock_guard lock(mu_);
    ring_.push_back(BusEvent{next_++, std::move(data)});
    while (ring_.size() > keep_) ring_.pop_front();
  }
  cv_.notify_all();
}

std::vector<BusEvent> EventBus::wait_after(std::uint64_t after, std::chrono::milliseconds timeout, bool& lost) {
  std::unique_lock lock(mu_);
  lost = false;
  cv_.wait_for(lock, timeout, [&] { return stopped_ || next_ - 1 > after; });
  std::vector<BusEvent> out;
  if (stopped_) return out;
  if (!ring_.empty() && ring_.front().seq > after + 1) lost = true;
  for (const auto& e : ring_) {
    if (e.seq > after) out.push_back(e);
  }
  return out;
}

std::uint64_t EventBus::last_seq() const {
  std::lock_guard lock(mu_);
  return next_ - 1;
}

void EventBus::stop() {
  {
    std::lock_guard lock(mu_);
    stopped_ = true;
  }
  cv_.notify_all();
}

bool EventBus::stopped() const {
  std::lock_guard lock(mu_);
  return stopped_;
}

}  // namespace echoline::web
