// Fast-capture planning (fast_capture_plan.hpp): the axis, every RBW step in both arrangements
// under rules R1-R4 and the limits, the quickest feasible plan, the trace back to the plan.
#include "daemon/core/fast_capture_plan.hpp"

#include <algorithm>
#include <cmath>
#include <limits>
#include <optional>

#include <fmt/format.h>

#include "daemon/core/frequency_text.hpp"
#include "daemon/core/rf_math.hpp"

namespace echoline::core {
namespace {

// Comparisons of times computed two ways tolerate this relative rounding.
constexpr double kRel = 1e-9;

std::string ms(double s) { return fmt::format("{:.4g} ms", s * 1e3); }

struct Geometry {
  FastCaptureAxis axis;
  double ramp_band_hz = 0;   // the source ramp: half a bin beyond the plan's first and last point
  double bins_in_ramp = 0;   // ramp band / bin
  double span_hz = 0;        // the receiver's span (the axis)
};

// Arrangement 1: ramps under one receiver sweep. R1 sets the ramp, R2 the receiver sweep.
FastCaptureOption ramps_under_sweep(const Geometry& g, double rbw, const FastCaptureInstruments& in, double settle_s,
                                    FastCapturePlan& out) {
  FastCaptureOption o{rbw, FastArrangement::ramps_under_sweep, false, 0, ""};
  const double r1 = min_ramp_s(g.ramp_band_hz, rbw);
  double ramp = std::max(r1, in.source_min_sweep_s);
  if (ramp > in.source_max_sweep_s * (1 + kRel)) {
    o.bound = fmt::format("R1 needs a ramp of {} s, the source's longest is {} s", ramp, in.source_max_sweep_s);
    return o;
  }
  // R2: over one bin's dwell the receiver moves one bin forward, so the ramp must run one ramp
  // band plus that bin relative to it: dwell >= ramp x (band + bin) / band, plus one retrace.
  const double period = ramp * (g.bins_in_ramp + 1) / g.bins_in_ramp + in.source_retrace_s;
  const double r2 = static_cast<double>(g.axis.points - 1) * period;
  // The receiver's own R1 over its span (its automatic sweep time) is far shorter than R2 here,
  // but a short span with a narrow RBW could need it.
  const double own = min_ramp_s(g.span_hz, rbw);
  double sweep = std::max({r2, own, in.receiver_min_sweep_s});
  if (sweep > in.receiver_max_sweep_s * (1 + kRel)) {
    o.bound = fmt::format("R2 needs a receiver sweep of {:.4g} s, the receiver's longest is {} s", sweep, in.receiver_max_sweep_s);
    return o;
  }
  o.feasible = true;
  o.capture_s = settle_s + sweep;
  const double bin = g.axis.bin_hz();
  // The start pulse sets the phase only where each dwell is exactly R2's: then every meeting
  // lands one bin further (a longer dwell would let the meetings drift across the trace).
  // The trigger delay must also be one the receiver takes (up to 10 s, Receiver), and the bound
  // it leaves smaller than the half bin of a free-running start.
  out.triggered = false;
  out.trigger_delay_s = 0;
  out.frequency_offset_hz = bin / 2;
  if (in.start_pulse_trigger && sweep <= r2 * (1 + kRel) && ramp + in.source_retrace_s <= 10) {
    const double delay = start_pulse_delay_s(ramp, in.source_retrace_s, g.ramp_band_hz, bin, in.trigger_latency_s);
    // At least 1 Hz: a fast capture's budget always carries the term (a calibration without it
    // is one made before the term existed, calibration_due).
    const double eps = std::max(
        triggered_offset_hz(ramp, in.source_retrace_s, g.ramp_band_hz, bin, period, g.axis.points - 2, delay, in), 1.0);
    if (eps < bin / 2) {
      out.triggered = true;
      out.trigger_delay_s = delay;
      out.frequency_offset_hz = eps;
      o.capture_s += 2 * (ramp + in.source_retrace_s);   // the wait for the pulse, then the delay
    }
  }
  const std::string ramp_why = r1 >= in.source_min_sweep_s
                                   ? fmt::format("R1: {} x {} / RBW^2", kFastCaptureK, format_frequency(g.ramp_band_hz))
                                   : "the source's shortest ramp";
  o.bound = fmt::format("ramp {} ({}), receiver sweep {} dwells of {}{} = {:.4g} s (R2)", ms(ramp), ramp_why,
                        g.axis.points - 1, ms(period), in.source_retrace_s > 0 ? " with retrace" : "", sweep);
  if (sweep > r2 * (1 + kRel)) o.bound += own >= in.receiver_min_sweep_s ? ", raised to the receiver's R1" : ", raised to the receiver's shortest sweep";
  if (out.triggered) {
    o.bound += fmt::format(", started {} after the ramp-start pulse (readings within {:.3g} Hz of their bins)",
                           ms(out.trigger_delay_s), out.frequency_offset_hz);
  }
  out.source_sweep_s = ramp;
  out.receiver_sweep_s = sweep;
  out.receiver_sweeps = 1;
  return o;
}

// Arrangement 2: one ramp under repeated max-hold sweeps. R1 sets the receiver sweep, R3 the ramp.
FastCaptureOption ramp_under_sweeps(const Geometry& g, double rbw, const FastCaptureInstruments& in, double settle_s,
                                    FastCapturePlan& out) {
  FastCaptureOption o{rbw, FastArrangement::ramp_under_sweeps, false, 0, ""};
  const double r1 = min_ramp_s(g.span_hz, rbw);
  const double sweep = std::max(r1, in.receiver_min_sweep_s);
  if (sweep > in.receiver_max_sweep_s * (1 + kRel)) {
    o.bound = fmt::format("R1 needs a receiver sweep of {:.4g} s, the receiver's longest is {} s", sweep, in.receiver_max_sweep_s);
    return o;
  }
  // R3: successive sweeps cross the slow tone (B/S) x sweep later than one cycle apart (the
  // receiver must catch up with it), and each crossing may move the tone at most one bin.
  const double cycle = sweep + in.receiver_rearm_s;
  const double ramp = std::max(g.bins_in_ramp * cycle + g.ramp_band_hz / g.span_hz * sweep, in.source_min_sweep_s);
  if (ramp > in.source_max_sweep_s * (1 + kRel)) {
    o.bound = fmt::format("R3 needs a ramp of {:.4g} s, the source's longest is {} s", ramp, in.source_max_sweep_s);
    return o;
  }
  // The source runs free: whatever its phase when the first sweep starts, sweeps covering one
  // period and one more cycle see every bin's stay (R3).
  const int sweeps = static_cast<int>(std::ceil((ramp + in.source_retrace_s) / cycle * (1 - kRel))) + 1;
  if (sweeps > in.receiver_max_sweeps) {
    o.bound = fmt::format("R3 needs {} max-hold sweeps, at most {} are allowed", sweeps, in.receiver_max_sweeps);
    return o;
  }
  o.feasible = true;
  o.capture_s = settle_s + sweeps * sweep + (sweeps - 1) * in.receiver_rearm_s;
  o.bound = fmt::format("receiver sweep {} ({}) + re-arm {}, ramp {:.4g} bins x cycle = {:.4g} s (R3), {} sweeps", ms(sweep),
                        r1 >= in.receiver_min_sweep_s ? "R1" : "the receiver's shortest sweep", ms(in.receiver_rearm_s),
                        g.bins_in_ramp, ramp, sweeps);
  out.source_sweep_s = ramp;
  out.receiver_sweep_s = sweep;
  out.receiver_sweeps = sweeps;
  out.triggered = false;   // the slow ramp's phase is not set: each crossing lands within half a bin
  out.trigger_delay_s = 0;
  out.frequency_offset_hz = g.axis.bin_hz() / 2;
  return o;
}

}  // namespace

std::vector<double> rbw_series_1_3(double lo_hz, double hi_hz) {
  std::vector<double> out;
  for (double decade = 1; decade <= 1e9; decade *= 10) {
    for (double m : {1.0, 3.0}) {
      const double v = m * decade;
      if (v >= lo_hz * (1 - kRel) && v <= hi_hz * (1 + kRel)) out.push_back(v);
    }
  }
  return out;
}

const char* to_string(FastArrangement a) {
  return a == FastArrangement::ramps_under_sweep ? "source ramps under one receiver sweep"
                                                 : "one source ramp under max-hold receiver sweeps";
}

FastCaptureAxis fast_capture_axis(const std::vector<double>& plan) {
  FastCaptureAxis axis;
  const double span = plan.back() - plan.front();
  const double even_step = span / static_cast<double>(plan.size() - 1);
  double min_step = span;
  bool even = true;
  for (std::size_t i = 1; i < plan.size(); ++i) {
    const double step = plan[i] - plan[i - 1];
    min_step = std::min(min_step, step);
    // Equal steps within 1 mHz or 1 ppm of the step: the bins land on the plan points.
    if (std::fabs(step - even_step) > std::max(1e-3, 1e-6 * even_step)) even = false;
  }
  double bin = even_step;
  int inner = static_cast<int>(plan.size());
  if (!even) {
    axis.bins_on_plan = false;
    const double bins = std::ceil(span / min_step - 1e-9) + 1;
    inner = static_cast<int>(std::min(bins, 1e9));
    bin = span / (inner - 1);
  }
  axis.start_hz = plan.front() - bin;   // R4: one bin beyond each end
  axis.stop_hz = plan.back() + bin;
  axis.points = inner + 2;
  return axis;
}

double min_ramp_s(double band_hz, double rbw_hz) { return kFastCaptureK * band_hz / (rbw_hz * rbw_hz); }

double start_pulse_delay_s(double ramp_s, double retrace_s, double band_hz, double bin_hz, double latency_s) {
  const double cycle = ramp_s + retrace_s;
  const double rate = band_hz / ramp_s;   // R_s
  double d = std::fmod(cycle - bin_hz / (2 * rate) - latency_s, cycle);
  if (d < 0) d += cycle;
  return d;
}

double meeting_drift_hz_per_s(double ramp_s, double band_hz, double bin_hz, double dwell_s) {
  const double rs = band_hz / ramp_s, rr = bin_hz / dwell_s;
  return rr * rs / (rs - rr);
}

double triggered_offset_hz(double ramp_s, double retrace_s, double band_hz, double bin_hz, double dwell_s, int last_bin,
                           double delay_s, const FastCaptureInstruments& in) {
  const double cycle = ramp_s + retrace_s;
  const double start = meeting_drift_hz_per_s(ramp_s, band_hz, bin_hz, dwell_s) *
                       (in.trigger_uncertainty_s + delay_s * in.receiver_time_accuracy);
  const double slide = bin_hz * last_bin * (dwell_s / cycle) * (in.source_time_accuracy + in.receiver_time_accuracy);
  return start + slide;
}

Result<FastCapturePlan> plan_fast_capture(const Recipe& recipe, const FastCaptureInstruments& in, double load_dbm) {
  const std::vector<double> plan = plan_frequencies(recipe);
  if (plan.size() < 2) {
    return make_error(ErrorKind::invalid_argument,
                      fmt::format("recipe {}: fast capture needs at least 2 plan frequencies, the plan has {}",
                                  recipe.name, plan.size()));
  }
  const FastCaptureLimits& lim = recipe.fast_capture;
  Geometry g;
  g.axis = fast_capture_axis(plan);
  if (g.axis.points > in.receiver_max_points) {
    return make_error(ErrorKind::invalid_argument,
                      fmt::format("recipe {}: fast capture: the plan needs a receiver trace of {} points (with one bin "
                                  "beyond each end), the receiver holds at most {}",
                                  recipe.name, g.axis.points, in.receiver_max_points));
  }
  const double bin = g.axis.bin_hz();
  g.span_hz = g.axis.stop_hz - g.axis.start_hz;
  g.ramp_band_hz = plan.back() - plan.front() + bin;
  g.bins_in_ramp = g.ramp_band_hz / bin;
  const double attenuation = std::max(0.0, recipe.receiver.attenuation_db);
  const double settle = recipe.source.settle_s;

  std::optional<FastCapturePlan> best;
  FastCapturePlan trial;
  std::vector<FastCaptureOption> considered;
  std::string margin_stop;
  double widest_ok = 0;
  for (double rbw : in.rbw_steps_hz) {
    const double floor = thermal_noise_floor_dbm(rbw, in.noise_figure_db) + attenuation;
    if (load_dbm - floor < lim.min_load_margin_db) {
      margin_stop = fmt::format("RBW {} would put the noise floor at {:.1f} dBm, {:.1f} dB under the LOAD", format_frequency(rbw),
                                floor, load_dbm - floor);
      break;   // wider steps only raise the floor
    }
    widest_ok = rbw;
    for (auto arrange : {ramps_under_sweep, ramp_under_sweeps}) {
      FastCaptureOption o = arrange(g, rbw, in, settle, trial);
      considered.push_back(o);
      if (!o.feasible) continue;
      // Strictly quicker wins: on a tie the narrower RBW (met first) keeps its lower floor.
      if (best && !(o.capture_s < best->capture_s * (1 - 1e-6))) continue;
      trial.arrangement = o.arrangement;
      trial.rbw_hz = rbw;
      trial.noise_floor_dbm = floor;
      trial.capture_s = o.capture_s;
      best = trial;
    }
  }
  if (!best) {
    return make_error(ErrorKind::invalid_argument,
                      fmt::format("recipe {}: fast capture: no RBW of the receiver keeps the LOAD ({:.1f} dBm) {} dB above "
                                  "the noise floor and meets the timing rules{}{}",
                                  recipe.name, load_dbm, lim.min_load_margin_db, margin_stop.empty() ? "" : "; ",
                                  margin_stop));
  }
  FastCapturePlan p = *best;
  p.axis = g.axis;
  p.source_start_hz = plan.front() - bin / 2;
  p.source_stop_hz = plan.back() + bin / 2;
  p.load_dbm = load_dbm;
  p.considered = considered;
  if (p.capture_s > lim.max_capture_s * (1 + kRel)) {
    return make_error(ErrorKind::invalid_argument,
                      fmt::format("recipe {}: fast capture: the quickest plan takes {:.3f} s (RBW {}, {}), longer than "
                                  "fast_capture.max_capture_s {} s",
                                  recipe.name, p.capture_s, format_frequency(p.rbw_hz), to_string(p.arrangement),
                                  lim.max_capture_s));
  }
  // Why: the binding rule of the winner, the margin, and the quickest of the other arrangement.
  const FastCaptureOption* chosen = nullptr;
  const FastCaptureOption* other = nullptr;
  for (const auto& o : p.considered) {
    if (o.rbw_hz == p.rbw_hz && o.arrangement == p.arrangement) chosen = &o;
    if (o.feasible && o.arrangement != p.arrangement && (!other || o.capture_s < other->capture_s)) other = &o;
  }
  p.reason = fmt::format("{} at RBW {}: {}. Noise floor {:.1f} dBm, {:.1f} dB under the LOAD ({:.1f} dBm; at least {} dB "
                         "asked){}.",
                         to_string(p.arrangement), format_frequency(p.rbw_hz), chosen ? chosen->bound : "", p.noise_floor_dbm,
                         load_dbm - p.noise_floor_dbm, load_dbm, lim.min_load_margin_db,
                         widest_ok > p.rbw_hz ? fmt::format("; a wider RBW (up to {}) is no quicker", format_frequency(widest_ok))
                                              : (margin_stop.empty() ? "" : "; " + margin_stop));
  if (other) {
    p.reason += fmt::format(" The other arrangement at best: {:.3f} s (RBW {}).", other->capture_s, format_frequency(other->rbw_hz));
  }
  return p;
}

Result<std::vector<Reading>> trace_to_plan(const FastCaptureAxis& axis, const std::vector<double>& trace_dbm,
                                           const std::vector<double>& plan) {
  if (trace_dbm.size() != static_cast<std::size_t>(axis.points)) {
    return make_error(ErrorKind::protocol, fmt::format("fast capture: the trace has {} values, the receiver axis {} points",
                                                       trace_dbm.size(), axis.points));
  }
  std::vector<Reading> out;
  out.reserve(plan.size());
  if (axis.bins_on_plan) {
    if (plan.size() + 2 != trace_dbm.size()) {
      return make_error(ErrorKind::protocol, fmt::format("fast capture: the trace has {} values, the plan {} points and "
                                                         "one extra bin at each end",
                                                         trace_dbm.size(), plan.size()));
    }
    for (std::size_t i = 0; i < plan.size(); ++i) out.push_back(Reading{plan[i], trace_dbm[i + 1]});
    return out;
  }
  const double bin = axis.bin_hz();
  const std::size_t last = trace_dbm.size() - 1;
  for (double f : plan) {
    const double x = std::clamp((f - axis.start_hz) / bin, 0.0, static_cast<double>(last));
    const std::size_t i = std::min(static_cast<std::size_t>(std::floor(x)), last - 1);
    const double w = x - static_cast<double>(i);
    out.push_back(Reading{f, trace_dbm[i] * (1 - w) + trace_dbm[i + 1] * w});
  }
  return out;
}

}  // namespace echoline::core
