// Fast capture: configure both instruments for a free-running source ramp and a max-held
// receiver sweep across the plan, capture, read one trace, map it to the plan; RF off always.
#include "daemon/service/fast_capture.hpp"

#include <chrono>
#include <cmath>
#include <thread>

#include <fmt/format.h>
#include <spdlog/spdlog.h>

#include "daemon/core/fast_capture_plan.hpp"
#include "daemon/core/instrument_needs.hpp"

namespace echoline::service {
namespace {

using Clock = std::chrono::steady_clock;

double seconds_since(Clock::time_point t0) { return std::chrono::duration<double>(Clock::now() - t0).count(); }

Error cancelled(std::string_view where) {
  return make_error(ErrorKind::cancelled, fmt::format("fast capture cancelled {}", where));
}

bool wait_or_cancel(double seconds, const std::atomic<bool>& cancel) {
  const auto until = Clock::now() + std::chrono::duration_cast<Clock::duration>(std::chrono::duration<double>(seconds));
  while (Clock::now() < until) {
    if (cancel.load()) return false;
    std::this_thread::sleep_for(std::min<Clock::duration>(until - Clock::now(), std::chrono::milliseconds(5)));
  }
  return !cancel.load();
}

bool checks_at_end(const drivers::Profile& p) { return p.check_errors != "never"; }

Status send_lines(drivers::ScpiSession& session, const core::Recipe& recipe, const std::string& role, bool setup) {
  const auto& table = setup ? recipe.setup : recipe.teardown;
  auto it = table.find(role);
  if (it == table.end()) return {};
  for (const auto& line : it->second) {
    if (Status s = session.write(line); !s) {
      return s.error().with_context(fmt::format("recipe {} {} for {}", recipe.name, setup ? "setup" : "teardown", role));
    }
  }
  return {};
}

Status require_ops(const drivers::Profile& p, std::string_view name) {
  for (auto op : core::fast_capture_operations(p.role)) {
    if (!p.has(op)) {
      return make_error(ErrorKind::config, fmt::format("{}: profile {} ({}) has no operation {}, which fast capture needs",
                                                       name, p.name, p.file, op));
    }
  }
  return {};
}

class Capture {
 public:
  Capture(drivers::Source& source, drivers::Receiver& receiver, const core::Recipe& recipe, SweepOptions options)
      : src_(source), rx_(receiver), recipe_(recipe), options_(options) {}

  Status check(const core::FastCapturePlan& plan) const {
    // Full reflection returns the whole source power through the coupler; losses only lower it.
    const double worst_dbm = recipe_.source.power_dbm - options_.coupling_db;
    if (worst_dbm > rx_.max_safe_input_dbm()) {
      return make_error(ErrorKind::unsafe,
                        fmt::format("recipe {}: source power {} dBm minus coupling {} dB can put {} dBm into the "
                                    "receiver, above its maximum safe input of {} dBm; lower the power",
                                    recipe_.name, recipe_.source.power_dbm, options_.coupling_db, worst_dbm,
                                    rx_.max_safe_input_dbm()));
    }
    if (Status s = require_ops(src_.profile(), src_.session().name()); !s) return s;
    if (Status s = require_ops(rx_.profile(), rx_.session().name()); !s) return s;
    const drivers::Profile& rp = rx_.profile();
    if (plan.axis.start_hz < rp.min_frequency_hz || plan.axis.stop_hz > rp.max_frequency_hz) {
      return make_error(ErrorKind::invalid_argument,
                        fmt::format("{}: fast capture axis {:.6f} to {:.6f} MHz is outside profile {} ({:.6f} to {:.6f} MHz)",
                                    rx_.session().name(), plan.axis.start_hz / 1e6, plan.axis.stop_hz / 1e6, rp.name,
                                    rp.min_frequency_hz / 1e6, rp.max_frequency_hz / 1e6));
    }
    const drivers::Profile& sp = src_.profile();
    if (plan.source_start_hz < sp.min_frequency_hz || plan.source_stop_hz > sp.max_frequency_hz) {
      return make_error(ErrorKind::invalid_argument,
                        fmt::format("{}: fast capture ramp {:.6f} to {:.6f} MHz is outside profile {} ({:.6f} to {:.6f} MHz)",
                                    src_.session().name(), plan.source_start_hz / 1e6, plan.source_stop_hz / 1e6, sp.name,
                                    sp.min_frequency_hz / 1e6, sp.max_frequency_hz / 1e6));
    }
    const double opc_s = std::chrono::duration<double>(rx_.session().options().opc_timeout).count();
    // A triggered sweep may first wait one ramp cycle for the pulse and up to one more of delay.
    const double wait_s = plan.receiver_sweep_s + (plan.triggered ? 2 * (plan.source_sweep_s + sp_retrace()) : 0.0);
    if (wait_s > opc_s) {
      return make_error(ErrorKind::invalid_argument,
                        fmt::format("{}: fast capture receiver sweep of {} s{} is longer than the *OPC? timeout of {} s "
                                    "(profile {}); raise io.opc_timeout_ms",
                                    rx_.session().name(), plan.receiver_sweep_s,
                                    plan.triggered ? fmt::format(" (with the wait for its trigger {:.4g} s)", wait_s) : "",
                                    opc_s, rx_.profile().name));
    }
    return {};
  }

  Status configure(const core::FastCapturePlan& plan) {
    if (options_.send_setup) {
      if (Status s = send_lines(rx_.session(), recipe_, "receiver", true); !s) return s;
      if (Status s = send_lines(src_.session(), recipe_, "source", true); !s) return s;
    }
    drivers::ReceiverSetup setup;
    setup.center_hz = (plan.axis.start_hz + plan.axis.stop_hz) / 2;
    setup.span_hz = plan.axis.stop_hz - plan.axis.start_hz;
    setup.rbw_hz = plan.rbw_hz;
    setup.vbw_hz = 0;   // VBW = RBW: the video filter follows the tone's short burst
    setup.reference_level_dbm = recipe_.receiver.reference_level_dbm;
    setup.attenuation_db = recipe_.receiver.attenuation_db;
    if (Status s = rx_.configure(setup); !s) return s;
    drivers::ScpiSession& rs = rx_.session();
    if (Status s = rx_.set_points(plan.axis.points); !s) return s;
    if (Status s = rx_.set_sweep_time(plan.receiver_sweep_s); !s) return s;
    if (Status s = rx_.set_max_hold(true); !s) return s;   // also clears the held trace
    if (plan.triggered) {
      // The sweep waits for the source's ramp-start pulse and starts at the planned phase.
      triggered_ = true;
      if (Status s = rx_.set_trigger_external(true); !s) return s;
      if (Status s = rx_.set_trigger_delay(plan.trigger_delay_s); !s) return s;
    }

    drivers::ScpiSession& ss = src_.session();
    const drivers::Profile& sp = src_.profile();
    if (Status s = src_.set_power(recipe_.source.power_dbm); !s) return s;
    if (Status s = src_.post_sweep(plan.source_start_hz, plan.source_stop_hz, plan.source_sweep_s); !s) return s;
    if (Status s = src_.post_sweep_mode(true); !s) return s;
    if (checks_at_end(sp)) {
      if (Status s = ss.drain_errors(); !s) return s;
    }
    if (checks_at_end(rx_.profile())) {
      if (Status s = rs.drain_errors(); !s) return s;
    }
    if (Status s = src_.set_output(true); !s) return s;
    // The source's *OPC? before the receiver starts, as the step engine does before every sweep:
    // the recipe's settling counts from this reply. Without it the receiver's sweep could start
    // while the ramp has not yet begun, and its first bins would read no tone at all.
    return src_.sync();
  }

  // RF off first, then the source back to CW and the receiver back to its own sweep time.
  Status restore() {
    if (Status s = src_.set_output(false); !s) return s.error().with_context("source output off");
    if (Status s = src_.post_sweep_mode(false); !s) return s;
    if (Status s = rx_.set_max_hold(false); !s) return s;
    if (Status s = rx_.set_sweep_time_auto(); !s) return s;
    if (triggered_) {
      if (Status s = untrigger(); !s) return s;
    }
    if (checks_at_end(src_.profile())) {
      if (Status s = src_.session().drain_errors(); !s) return s;
    }
    if (checks_at_end(rx_.profile())) {
      if (Status s = rx_.session().drain_errors(); !s) return s;
    }
    return {};
  }

  void restore_best_effort() {
    Status s = src_.set_output(false);
    if (!s) {
      spdlog::warn("source output off failed ({}); reconnecting to retry", s.error().message);
      if (Status r = src_.session().reconnect(); !r) {
        spdlog::error("SAFETY: could not reconnect to switch the source output off: {}", r.error().message);
        return;
      }
      if (Status again = src_.set_output(false); !again) {
        spdlog::error("SAFETY: source output may still be ON: {}", again.error().message);
        return;
      }
    }
    (void)src_.post_sweep_mode(false);
    if (rx_.session().is_open()) {
      (void)rx_.set_max_hold(false);
      (void)rx_.set_sweep_time_auto();
    }
    if (triggered_) {
      // A receiver left armed would make every later sweep wait for a pulse that never comes:
      // reconnect if the link dropped (an *OPC? timeout closes it), then abort and disarm.
      if (!rx_.session().is_open()) {
        if (Status r = rx_.session().reconnect(); !r) {
          spdlog::error("{}: could not reconnect to return the receiver to immediate triggering: {}", rx_.session().name(),
                        r.error().message);
          return;
        }
      }
      if (Status s = untrigger(); !s) spdlog::warn("{}: back to immediate triggering failed: {}", rx_.session().name(), s.error().message);
    }
  }

 private:
  double sp_retrace() const { return src_.profile().sweep.retrace_s; }

  // Abort anything armed, trigger at INIT again, no delay.
  Status untrigger() {
    if (Status s = rx_.abort(); !s) return s;
    if (Status s = rx_.set_trigger_external(false); !s) return s;
    if (Status s = rx_.set_trigger_delay(0); !s) return s;
    triggered_ = false;
    return {};
  }

  drivers::Source& src_;
  drivers::Receiver& rx_;
  const core::Recipe& recipe_;
  SweepOptions options_;
  bool triggered_ = false;   // the receiver was set to its external trigger
};

}  // namespace

SweepOutcome run_fast_capture(drivers::Source& source, drivers::Receiver& receiver, const core::Recipe& recipe,
                              const core::FastCapturePlan& fast_plan, const std::atomic<bool>& cancel,
                              const ProgressFn& progress, SweepOptions options) {
  SweepOutcome out;
  const auto t0 = Clock::now();
  const std::vector<double> freqs = core::plan_frequencies(recipe);
  const core::FastCapturePlan* plan = &fast_plan;
  Capture cap(source, receiver, recipe, options);
  if (Status s = cap.check(*plan); !s) {
    out.error = s.error();
    return out;
  }
  // Heartbeat allowances (engine_heartbeat.hpp): every reply and *OPC? a step may wait for.
  EngineHeartbeat& heartbeat = *options.heartbeat;
  const SweepHeartbeatScope heartbeat_scope(heartbeat);
  const drivers::SessionOptions& src_io = source.session().options();
  const drivers::SessionOptions& rx_io = receiver.session().options();
  int setup_lines = 0;
  for (const auto& [role, lines] : recipe.setup) setup_lines += static_cast<int>(lines.size());
  int teardown_lines = 0;
  for (const auto& [role, lines] : recipe.teardown) teardown_lines += static_cast<int>(lines.size());

  auto fail = [&](Error e) {
    heartbeat.beat(step_allowance(src_io, rx_io, 8, 2));   // output off, a reconnect, the rest
    out.error = std::move(e);
    out.readings.clear();
    cap.restore_best_effort();
    out.sweep_s = seconds_since(t0);
    return out;
  };
  const int n = static_cast<int>(freqs.size());
  heartbeat.beat(step_allowance(src_io, rx_io, setup_lines + 30, 2, recipe.source.settle_s));
  if (cancel.load()) return fail(cancelled("before setup"));
  if (Status s = cap.configure(*plan); !s) return fail(s.error().with_context("fast capture setup"));
  if (!wait_or_cancel(recipe.source.settle_s, cancel)) return fail(cancelled("while the source settled"));

  for (int k = 0; k < plan->receiver_sweeps; ++k) {
    heartbeat.beat(step_allowance(src_io, rx_io, 2, 1));
    if (cancel.load()) return fail(cancelled(fmt::format("before receiver sweep {} of {}", k + 1, plan->receiver_sweeps)));
    Status s = receiver.sweep_and_wait(std::nullopt);   // INIT and *OPC? as one message
    if (!s) return fail(s.error().with_context(fmt::format("fast capture receiver sweep {} of {}", k + 1, plan->receiver_sweeps)));
    if (progress) progress(n * (k + 1) / plan->receiver_sweeps, n);
  }
  // The trace read, then RF off, the source back to CW and the teardown lines.
  heartbeat.beat(step_allowance(src_io, rx_io, teardown_lines + 16, 1));
  auto trace = receiver.read_trace_dbm();
  if (!trace) return fail(trace.error().with_context("fast capture trace read"));
  auto readings = core::trace_to_plan(plan->axis, *trace, freqs);
  if (!readings) return fail(readings.error().with_context(receiver.session().name()));
  for (const auto& r : *readings) {
    if (!std::isfinite(r.raw_dbm)) {
      return fail(make_error(ErrorKind::protocol, fmt::format("{}: fast capture trace value at {:.6f} MHz is not a finite "
                                                              "number", receiver.session().name(), r.frequency_hz / 1e6)));
    }
  }
  if (Status s = cap.restore(); !s) return fail(s.error().with_context("fast capture end"));
  if (Status s = send_lines(source.session(), recipe, "source", false); !s) return fail(s.error());
  if (Status s = send_lines(receiver.session(), recipe, "receiver", false); !s) return fail(s.error());
  out.readings = std::move(*readings);
  out.sweep_s = seconds_since(t0);
  return out;
}

}  // namespace echoline::service
