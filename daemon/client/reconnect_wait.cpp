#include "daemon/client/reconnect_wait.hpp"

#include <algorithm>
#include <thread>

#include <fmt/format.h>

namespace echoline::client {

namespace {

using Clock = std::chrono::steady_clock;

Seconds since(Clock::time_point start) { return std::chrono::duration_cast<Seconds>(Clock::now() - start); }

}  // namespace

Seconds reconnect_delay(int attempt) {
  if (attempt <= 1) return Seconds{1};
  if (attempt == 2) return Seconds{2};
  if (attempt == 3) return Seconds{4};
  return Seconds{5};
}

ReconnectOutcome wait_for_daemon(ApiClient& api, std::ostream& out, const ReconnectPolicy& policy) {
  ReconnectOutcome o;
  const auto start = Clock::now();
  const bool forever = policy.timeout.count() <= 0;
  for (int attempt = 1;; ++attempt) {
    Seconds delay = reconnect_delay(attempt);
    if (!forever) delay = std::min(delay, std::max(Seconds{0}, policy.timeout - since(start)));
    // Wait in one-second steps so a terminal shows a live counter.
    const auto wake = Clock::now() + delay;
    while (Clock::now() < wake) {
      if (policy.output_is_tty) {
        out << fmt::format("\r  waiting for the station service: {} s, attempt {} in {} s   ", since(start).count(),
                           attempt, std::chrono::duration_cast<Seconds>(wake - Clock::now()).count() + 1)
            << std::flush;
      }
      std::this_thread::sleep_for(std::min<Clock::duration>(std::chrono::seconds(1), wake - Clock::now()));
    }
    Status s = api.reconnect(Millis{2000});
    o.attempts = attempt;
    o.waited = since(start);
    if (s) {
      if (policy.output_is_tty) out << "\n";
      o.back = true;
      return o;
    }
    o.last_error = s.error();
    const bool give_up = !forever && o.waited >= policy.timeout;
    Seconds next = reconnect_delay(attempt + 1);
    if (!forever) next = std::min(next, std::max(Seconds{0}, policy.timeout - o.waited));
    if (policy.output_is_tty) {
      out << fmt::format("\r  waiting for the station service: {} s, attempt {} failed   ", o.waited.count(), attempt)
          << std::flush;
      if (give_up) out << "\n";
    } else {
      out << fmt::format("  attempt {} after {} s: not reachable ({}){}\n", attempt, o.waited.count(), s.error().message,
                         give_up ? "" : fmt::format("; next try in {} s", next.count()))
          << std::flush;
    }
    if (give_up) return o;
  }
}

}  // namespace echoline::client
