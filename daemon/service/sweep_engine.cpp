// Step sweep: configure, then per point set source and receiver (pipelined), settle, trigger,
// synchronise, read the peak; output OFF on every way out.
#include "daemon/service/sweep_engine.hpp"

#include <chrono>
#include <cmath>
#include <thread>

#include <fmt/format.h>
#include <spdlog/spdlog.h>

namespace echoline::service {
namespace {

using Clock = std::chrono::steady_clock;

double seconds_since(Clock::time_point t0) {
  return std::chrono::duration<double>(Clock::now() - t0).count();
}

Error cancelled_at(int point, int of) {
  return make_error(ErrorKind::cancelled, fmt::format("sweep cancelled before point {} of {}", point, of));
}

// Sleeps `seconds`, waking early when cancelled. Returns false when cancelled.
bool settle(double seconds, const std::atomic<bool>& cancel) {
  if (seconds <= 0) return !cancel.load();
  const auto until = Clock::now() + std::chrono::duration_cast<Clock::duration>(std::chrono::duration<double>(seconds));
  while (Clock::now() < until) {
    if (cancel.load()) return false;
    auto left = until - Clock::now();
    std::this_thread::sleep_for(std::min<Clock::duration>(left, std::chrono::milliseconds(5)));
  }
  return !cancel.load();
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
  setup.vbw_hz = recipe.receiver.vbw_hz > 0 ? recipe.receiver.vbw_hz : recipe.receiver.rbw_hz;
  setup.reference_level_dbm = recipe.receiver.reference_level_dbm;
  setup.attenuation_db = recipe.receiver.attenuation_db;
  if (Status s = receiver_.configure(setup); !s) return s;
  if (Status s = source_.set_power(recipe.source.power_dbm); !s) return s;
  if (Status s = source_.set_frequency(plan.front()); !s) return s;
  if (checks_at_end(source_.profile())) {
    if (Status s = source_.session().drain_errors(); !s) return s;
  }
  if (checks_at_end(receiver_.profile())) {
    if (Status s = receiver_.session().drain_errors(); !s) return s;
  }
  return source_.set_output(true);
}

Status SweepEngine::move_to(double frequency_hz) {
  // Two instruments on two connections: send both commands, then wait for each.
  if (Status s = source_.post_frequency(frequency_hz); !s) return s;
  if (Status s = receiver_.post_center(frequency_hz); !s) return s;
  if (Status s = source_.sync(); !s) return s;
  return receiver_.session().wait_complete();
}

Result<double> SweepEngine::measure_point(const core::Recipe& recipe) {
  const int n = std::max(1, recipe.receiver.averages);
  std::vector<double> values;
  values.reserve(static_cast<std::size_t>(n));
  for (int k = 0; k < n; ++k) {
    if (Status s = receiver_.trigger(); !s) return s.error();
    if (Status s = receiver_.wait_sweep(); !s) return s.error();
    Result<double> peak = receiver_.read_peak_dbm();
    if (!peak) return peak.error();
    if (!std::isfinite(*peak)) {
      return make_error(ErrorKind::protocol, fmt::format("{}: peak reading is not a finite number", receiver_.session().name()));
    }
    values.push_back(*peak);
  }
  if (checks_each_step(source_.profile())) {
    if (Status s = source_.session().drain_errors(); !s) return s.error();
  }
  if (checks_each_step(receiver_.profile())) {
    if (Status s = receiver_.session().drain_errors(); !s) return s.error();
  }
  return average_dbm(values);
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

  auto fail = [&](Error e) {
    out.error = std::move(e);
    output_off_best_effort();
    out.sweep_s = seconds_since(t0);
    return out;
  };

  if (cancel.load()) return fail(cancelled_at(1, n));
  if (Status s = configure(recipe); !s) return fail(s.error().with_context("sweep setup"));

  for (int i = 0; i < n; ++i) {
    const double f = plan[static_cast<std::size_t>(i)];
    if (cancel.load()) return fail(cancelled_at(i + 1, n));
    Result<double> v = [&]() -> Result<double> {
      if (i > 0) {
        if (Status s = move_to(f); !s) return s.error();
      }
      if (!settle(recipe.source.settle_s, cancel)) return cancelled_at(i + 1, n);
      return measure_point(recipe);
    }();
    if (!v) {
      if (v.error().kind == ErrorKind::cancelled) return fail(v.error());
      return fail(v.error().with_context(fmt::format("sweep point {} of {} at {:.6f} MHz", i + 1, n, f / 1e6)));
    }
    out.readings.push_back(core::Reading{f, *v});
    if (progress) progress(i + 1, n);
  }

  Status end_checks;
  if (checks_at_end(source_.profile()) && !checks_each_step(source_.profile())) end_checks = source_.session().drain_errors();
  if (end_checks && checks_at_end(receiver_.profile()) && !checks_each_step(receiver_.profile())) {
    end_checks = receiver_.session().drain_errors();
  }
  if (!end_checks) return fail(end_checks.error().with_context("sweep end error check"));

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
