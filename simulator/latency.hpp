// Latency profiles and the simulator clock: how long a simulated instrument takes before a reply
// can be read, and what World::now_s reads. "instant" answers at once and runs a virtual clock
// (every modelled wait is over by the next message); "bench" runs on the steady clock and adds a
// per-command processing time. Pure apart from reading std::chrono::steady_clock.
// Threading: single-threaded (the server's io thread).
#pragma once

#include <chrono>
#include <optional>
#include <string>
#include <string_view>

namespace echoline::sim {

struct LatencyProfile {
  std::string name = "instant";   // "instant" | "bench"
  bool instant = true;            // true: no real waiting, virtual clock
  // bench: time a benchtop instrument takes to parse and answer a query, s. From memory:
  // LAN-connected benchtop generators and analyzers answer simple queries in roughly
  // 1-10 ms; 3 ms is a typical middle. Not sourced; override it in the config.
  double command_s = 0.003;
  // bench: factor applied to the modelled delays (sweep time, settling) of Reply::delay_s.
  double delay_scale = 1.0;
  // instant: virtual seconds added before each program message, so that any settling the
  // previous command started (source settling, a sweep) counts as done.
  double instant_step_s = 1.0;
};

// The named profile with its defaults; nullopt for an unknown name.
std::optional<LatencyProfile> latency_profile(std::string_view name);

// Real seconds the server waits before sending a reply whose modelled delay is `modelled_s`
// (fault delays come on top and are not scaled).
double reply_wait_s(const LatencyProfile& profile, double modelled_s);

// The simulator clock behind World::now_s.
class SimClock {
 public:
  explicit SimClock(const LatencyProfile& profile);
  // Time for the next program message: steady seconds since start (bench), or the virtual
  // clock advanced by instant_step_s (instant).
  double next_message_time();
  // instant: the client waited `modelled_s` for a reply (virtual time passes); bench: no-op.
  void waited(double modelled_s);
  double now() const;

 private:
  bool instant_;
  double step_s_;
  double virtual_s_ = 0;
  std::chrono::steady_clock::time_point start_;
};

}  // namespace echoline::sim
