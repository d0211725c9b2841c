// Step sweep: configure, then per point one receiver message (center, INIT, *OPC?), then the
// marker read while the source moves to the next frequency and settles on its own connection;
// errors drained once per point (each-step) or once per sweep (end-of-sweep); output OFF on
// every way out.
#include "daemon/service/sweep_engine.hpp"

#include <chrono>
#include <cmath>
#include <condition_variable>
#include <memory>
#include <mutex>
#include <optional>
#include <thread>

#include <fmt/format.h>
#include <spdlog/spdlog.h>

#include "daemon/service/test_hooks.hpp"

namespace echoline::service {
namespace {

using Clock = std::chrono::steady_clock;

double seconds_since(Clock::time_point t0) {
  return std::chrono::duration<double>(Clock::now() - t0).count();
}

Error cancelled_at(int point, int of) {
  return make_error(ErrorKind::cancelled, fmt::format("sweep cancelled before point {} of {}", point, of));
}

// Sleeps until `deadline`, waking early when cancelled. Returns false when cancelled.
bool settle_until(Clock::time_point deadline, const std::atomic<bool>& cancel) {
  while (Clock::now() < deadline) {
    if (cancel.load()) return false;
    auto left = deadline - Clock::now();
    std::this_thread::sleep_for(std::min<Clock::duration>(left, std::chrono::milliseconds(5)));
  }
  return !cancel.load();
}

Clock::duration to_duration(double seconds) {
  return std::chrono::duration_cast<Clock::duration>(std::chrono::duration<double>(std::max(0.0, seconds)));
}

// Runs one job at a time on its own thread so the source's round trip overlaps the receiver's.
// Jobs end on their own (every session call has a timeout); the destructor waits for a running one.
class Lane {
 public:
  Lane() : thread_([this] { loop(); }) {}
  ~Lane() {
    {
      std::lock_guard<std::mutex> lock(mu_);
      stop_ = true;
    }
    wake_.notify_all();
    thread_.join();
  }
  Lane(const Lane&) = delete;
  Lane& operator=(const Lane&) = delete;

  // REQUIRES: !busy().
  void start(std::function<Status()> job) {
    {
      std::lock_guard<std::mutex> lock(mu_);
      job_ = std::move(job);
      busy_ = true;
    }
    wake_.notify_all();
  }
  // Waits for the job started last and returns its status (success when none is running).
  Status finish() {
    std::unique_lock<std::mutex> lock(mu_);
    done_.wait(lock, [&] { return !busy_; });
    Status r = std::move(result_);
    result_ = Status{};
    return r;
  }

 private:
  void loop() {
    std::unique_lock<std::mutex> lock(mu_);
    for (;;) {
      wake_.wait(lock, [&] { return stop_ || job_ != nullptr; });
      if (job_ == nullptr) return;   // stop requested and nothing left to run
      auto job = std::move(job_);
      job_ = nullptr;
      lock.unlock();
      Status r = job();
      lock.lock();
      result_ = std::move(r);
      busy_ = false;
      done_.notify_all();
    }
  }

  std::mutex mu_;
  std::condition_variable wake_, done_;
  std::function<Status()> job_;
  Status result_;
  bool busy_ = false;
  bool stop_ = false;
  std::thread thread_;   // last: starts after every member above exists
};

// "A" and "B?" as one program message "A;:B?" (IEEE 488.2-1992 7.4.1: program message units are
// separated by ';'; SCPI-1999 Vol 1 6.2.4: a leading ':' returns the header path to the root).
std::string compound(const std::string& first, const std::string& second) {
  if (second.empty() || second.front() == ':' || second.front() == '*') return first + ";" + second;
  return first + ";:" + second;
}

bool checks_each_step(const drivers::Profile& p) { return p.check_errors == "each-step"; }
bool checks_at_end(const drivers::Profile& p) { return p.check_errors != "never"; }

Status send_lines(drivers::ScpiSession& session, const core::Recipe& recipe, const std::string& role) {
  auto it = recipe.setup.find(role);
  if (it == recipe.setup.end()) return {};
  for (const auto& line : it->second) {
    if (Status s = session.write(line); !s) return s.error().with_context(fmt::format("recipe {} setup for {}", recipe.name, role));
  }
  return {};
}

}  // namespace

double average_dbm(const std::vector<double>& dbm) {
  double sum_mw = 0;
  for (double v : dbm) sum_mw += std::pow(10.0, v / 10.0);
  return 10.0 * std::log10(sum_mw / static_cast<double>(dbm.size()));
}

SweepEngine::SweepEngine(drivers::Source& source, drivers::Receiver& receiver, SweepOptions options)
    : source_(source), receiver_(receiver), options_(options) {}

Status SweepEngine::check_safe(const core::Recipe& recipe) const {
  // Full reflection sends the whole source power back through the coupler; losses only lower
  // it, so ignoring them errs on the safe side.
  const double worst_dbm = recipe.source.power_dbm - options_.coupling_db;
  const double limit = receiver_.max_safe_input_dbm();
  if (worst_dbm > limit) {
    return make_error(ErrorKind::unsafe,
                      fmt::format("recipe {}: source power {} dBm minus coupling {} dB can put {} dBm into the receiver, "
                                  "above its maximum safe input of {} dBm; lower the power",
                                  recipe.name, recipe.source.power_dbm, options_.coupling_db, worst_dbm, limit));
  }
  return {};
}

Status SweepEngine::configure(const core::Recipe& recipe) {
  const auto plan = core::plan_frequencies(recipe);
  if (options_.send_setup) {
    if (Status s = send_lines(receiver_.session(), recipe, "receiver"); !s) return s;
    if (Status s = send_lines(source_.session(), recipe, "source"); !s) return s;
  }
  drivers::ReceiverSetup setup;
  setup.center_hz = plan.front();
  setup.span_hz = recipe.receiver.span_hz;
  setup.rbw_hz = recipe.receiver.rbw_hz;
  setup.vbw_hz = recipe.receiver.vbw_hz;   // 0 = same as RBW
  setup.reference_level_dbm = recipe.receiver.reference_level_dbm;
  setup.attenuation_db = recipe.receiver.attenuation_db;
  if (Status s = receiver_.configure(setup); !s) return s;
  if (Status s = source_.set_power(recipe.source.power_dbm); !s) return s;
  if (Status s = source_.set_frequency(plan.front()); !s) return s;
  // Setup errors are read once here (each-step drivers already read them per command).
  if (!checks_each_step(source_.profile()) && checks_at_end(source_.profile())) {
    if (Status s = source_.session().drain_errors(); !s) return s;
  }
  if (!checks_each_step(receiver_.profile()) && checks_at_end(receiver_.profile())) {
    if (Status s = receiver_.session().drain_errors(); !s) return s;
  }
  if (Status s = source_.set_output(true); !s) return s;
  return source_.sync();   // the first point is measured only once the source has taken it all
}

Status SweepEngine::source_move(double frequency_hz) {
  if (Status s = source_.move_and_sync(frequency_hz); !s) return s;
  if (checks_each_step(source_.profile())) return source_.session().drain_errors();
  return {};
}

Status SweepEngine::receiver_sweep(std::optional<double> center_hz) {
  // One message "FREQ:CENT f;:INIT:IMM;*OPC?": the *OPC? answers only when the sweep has ended
  // (IEEE 488.2-1992 12.5.3: *OPC? answers once every pending operation is complete).
  return receiver_.sweep_and_wait(center_hz);
}

Result<double> SweepEngine::receiver_peak() {
  const drivers::Profile& p = receiver_.profile();
  auto peak = p.command("peak_search").expand({});
  if (!peak) return peak.error().with_context(receiver_.session().name());
  Result<double> y = receiver_.session().query_number(compound(*peak, p.command("read_marker_y").text()));
  if (!y) return y;
  if (!std::isfinite(*y)) {
    return make_error(ErrorKind::protocol, fmt::format("{}: peak reading is not a finite number", receiver_.session().name()));
  }
  return y;
}

void SweepEngine::output_off_best_effort() {
  Status s = source_.set_output(false);
  if (s) return;
  spdlog::warn("source output off failed ({}); reconnecting to retry", s.error().message);
  if (Status r = source_.session().reconnect(); !r) {
    spdlog::error("SAFETY: could not reconnect to switch the source output off: {}", r.error().message);
    return;
  }
  if (Status again = source_.set_output(false); !again) {
    spdlog::error("SAFETY: source output may still be ON: {}", again.error().message);
  }
}

SweepOutcome SweepEngine::run(const core::Recipe& recipe, const std::atomic<bool>& cancel, const ProgressFn& progress) {
  SweepOutcome out;
  const auto t0 = Clock::now();
  const auto plan = core::plan_frequencies(recipe);
  const int n = static_cast<int>(plan.size());
  if (plan.empty()) {
    out.error = make_error(ErrorKind::invalid_argument, fmt::format("recipe {}: the plan has no frequencies", recipe.name));
    return out;
  }
  if (Status s = check_safe(recipe); !s) {
    out.error = s.error();
    return out;
  }
  out.readings.reserve(plan.size());
  const int averages = std::max(1, recipe.receiver.averages);

  // Heartbeat allowances: every reply and *OPC? a step may wait for, at the instruments' timeouts.
  EngineHeartbeat& heartbeat = *options_.heartbeat;
  const SweepHeartbeatScope heartbeat_scope(heartbeat);
  const drivers::SessionOptions& src_io = source_.session().options();
  const drivers::SessionOptions& rx_io = receiver_.session().options();
  auto lines_for = [](const std::map<std::string, std::vector<std::string>>& table) {
    int n = 0;
    for (const auto& [role, lines] : table) n += static_cast<int>(lines.size());
    return n;
  };
  // Setup lines, the receiver's settings and the source's, each with an error query; *OPC? twice.
  const auto setup_allowance = step_allowance(src_io, rx_io, lines_for(recipe.setup) + 24, 2);
  // The receiver's sweeps and marker reads, the source's move, the error queries; the settling.
  const auto point_allowance = step_allowance(src_io, rx_io, averages + 6, averages + 1, recipe.source.settle_s);
  // Error queries, output off, the teardown lines.
  const auto end_allowance = step_allowance(src_io, rx_io, lines_for(recipe.teardown) + 8, 1);
  // Output off, a reconnect and output off again.
  const auto recovery_allowance = step_allowance(src_io, rx_io, 6, 2);

  // The source moves to the next frequency on this lane while the receiver's marker is read.
  std::unique_ptr<Lane> lane;
  if (n > 1) lane = std::make_unique<Lane>();
  bool source_moving = false;
  auto join_source = [&]() -> Status {
    if (!source_moving) return {};
    source_moving = false;
    return lane->finish();
  };

  auto fail = [&](Error e) {
    heartbeat.beat(recovery_allowance);
    (void)join_source();   // the source session is used again below, on this thread only
    out.error = std::move(e);
    output_off_best_effort();
    out.sweep_s = seconds_since(t0);
    return out;
  };
  auto at_point = [&](int i) { return fmt::format("sweep point {} of {} at {:.6f} MHz", i + 1, n, plan[static_cast<std::size_t>(i)] / 1e6); };

  heartbeat.beat(setup_allowance);
  if (cancel.load()) return fail(cancelled_at(1, n));
  if (Status s = configure(recipe); !s) return fail(s.error().with_context("sweep setup"));

  // Per point: the receiver sweeps at f (one message with the pending center move and *OPC?);
  // then the source moves to the next frequency on the lane while the marker is read here. The
  // settling time counts from the source's *OPC? reply (its stamp `moved_at`), so it overlaps
  // the marker read too; this thread sleeps out what is left, one wake-up per point.
  std::optional<double> pending_center;   // configure() already centred the receiver on plan[0]
  const Clock::duration settle_time = to_duration(recipe.source.settle_s);
  Clock::time_point moved_at = Clock::now();   // configure() ended with the source's *OPC?
  for (int i = 0; i < n; ++i) {
    heartbeat.beat(point_allowance);
    const double f = plan[static_cast<std::size_t>(i)];
    const bool has_next = i + 1 < n;
    if (Status s = join_source(); !s) return fail(s.error().with_context(at_point(i)));
    if (!settle_until(moved_at + settle_time, cancel)) return fail(cancelled_at(i + 1, n));

    std::vector<double> values;
    values.reserve(static_cast<std::size_t>(averages));
    for (int k = 0; k < averages; ++k) {
      if (Status s = receiver_sweep(pending_center); !s) return fail(s.error().with_context(at_point(i)));
      pending_center.reset();
      if (k + 1 == averages && has_next) {
        // The sweep is over, so the source may leave f while the stored trace is read.
        const double next = plan[static_cast<std::size_t>(i + 1)];
        lane->start([this, next, &moved_at]() -> Status {
          Status s = source_move(next);
          moved_at = Clock::now();   // read by this thread only after lane->finish()
          return s;
        });
        source_moving = true;
      }
      Result<double> peak = receiver_peak();
      if (!peak) return fail(peak.error().with_context(at_point(i)));
      values.push_back(*peak);
    }
    if (checks_each_step(receiver_.profile())) {
      if (Status s = receiver_.session().drain_errors(); !s) return fail(s.error().with_context(at_point(i)));
    }
    if (has_next) pending_center = plan[static_cast<std::size_t>(i + 1)];
    out.readings.push_back(core::Reading{f, average_dbm(values)});
    if (progress) progress(i + 1, n);
    test_hooks::hang_after_point(i + 1);   // TEST ONLY (test_hooks.hpp): nothing in an installed daemon
  }
  heartbeat.beat(end_allowance);
  if (Status s = join_source(); !s) return fail(s.error().with_context("sweep end"));

  // end-of-sweep policy: one error read per instrument per sweep; an error found here aborts
  // the run (the readings may be wrong), never lets it pass.
  if (!checks_each_step(source_.profile()) && checks_at_end(source_.profile())) {
    if (Status s = source_.session().drain_errors(); !s) return fail(s.error().with_context("sweep end error check"));
  }
  if (!checks_each_step(receiver_.profile()) && checks_at_end(receiver_.profile())) {
    if (Status s = receiver_.session().drain_errors(); !s) return fail(s.error().with_context("sweep end error check"));
  }

  Status off = source_.set_output(false);
  if (!off) return fail(off.error().with_context("sweep end: source output off"));
  auto td = recipe.teardown.find("source");
  if (td != recipe.teardown.end()) {
    for (const auto& line : td->second) {
      if (Status s = source_.session().write(line); !s) return fail(s.error().with_context("recipe teardown for source"));
    }
  }
  td = recipe.teardown.find("receiver");
  if (td != recipe.teardown.end()) {
    for (const auto& line : td->second) {
      if (Status s = receiver_.session().write(line); !s) return fail(s.error().with_context("recipe teardown for receiver"));
    }
  }
  out.sweep_s = seconds_since(t0);
  return out;
}

}  // namespace echoline::service
