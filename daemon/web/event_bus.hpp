// The station's live events for the pages: a numbered ring of the latest JSON events that any
// number of server-sent-event streams read at their own pace. A slow reader never holds up the
// publisher (the sweep engine's worker thread): it skips ahead and is told to reload.
// Thread-safe.
#pragma once

#include <chrono>
#include <condition_variable>
#include <cstdint>
#include <deque>
#include <mutex>
#include <string>
#include <vector>

namespace echoline::web {

struct BusEvent {
  std::uint64_t seq = 0;   // 1, 2, 3, ... in publishing order
  std::string data;        // one JSON object
};

class EventBus {
 public:
  explicit EventBus(std::size_t keep = 512) : keep_(keep) {}

  // Appends an event and wakes the readers. O(1); never waits for a reader.
  void publish(std::string data);
  // Events after `after`, waiting up to `timeout` when there are none. `lost` is set when the
  // reader fell so far behind that events it never saw were dropped. Empty after stop().
  std::vector<BusEvent> wait_after(std::uint64_t after, std::chrono::milliseconds timeout, bool& lost);
  std::uint64_t last_seq() const;
  void stop();   // wakes every reader for good
  bool stopped() const;

 private:
  const std::size_t keep_;
  mutable std::mutex mu_;
  std::condition_variable cv_;
  std::deque<BusEvent> ring_;
  std::uint64_t next_ = 1;
  bool stopped_ = false;
};

}  // namespace echoline::web
