// Fast-capture planning (fast_capture_plan.hpp): axis, sweep times, trace to plan points.
#include "daemon/core/fast_capture_plan.hpp"

#include <algorithm>
#include <cmath>

#include <fmt/format.h>

namespace echoline::core {

FastCaptureAxis fast_capture_axis(const std::vector<double>& plan) {
  FastCaptureAxis axis;
  axis.start_hz = plan.front();
  axis.stop_hz = plan.back();
  const double span = axis.stop_hz - axis.start_hz;
  const double even_step = span / static_cast<double>(plan.size() - 1);
  double min_step = span;
  bool even = true;
  for (std::size_t i = 1; i < plan.size(); ++i) {
    const double step = plan[i] - plan[i - 1];
    min_step = std::min(min_step, step);
    // Equal steps within 1 mHz or 1 ppm of the step: the bins land on the plan points.
    if (std::fabs(step - even_step) > std::max(1e-3, 1e-6 * even_step)) even = false;
  }
  if (even) {
    axis.points = static_cast<int>(plan.size());
    return axis;
  }
  axis.bins_on_plan = false;
  const double bins = std::ceil(span / min_step - 1e-9) + 1;
  axis.points = static_cast<int>(std::min(bins, static_cast<double>(kFastCaptureMaxBins)));
  return axis;
}

double min_source_sweep_s(double band_hz, double rbw_hz) {
  return std::max(kFastCaptureMinSweepS, kFastCaptureK * band_hz / (rbw_hz * rbw_hz));
}

double min_receiver_sweep_s(int bins, double source_sweep_s) {
  return static_cast<double>(std::max(1, bins - 1)) * source_sweep_s;
}

Result<FastCapturePlan> plan_fast_capture(const Recipe& recipe) {
  const std::vector<double> plan = plan_frequencies(recipe);
  if (plan.size() < 2) {
    return make_error(ErrorKind::invalid_argument,
                      fmt::format("recipe {}: fast capture needs at least 2 plan frequencies, the plan has {}",
                                  recipe.name, plan.size()));
  }
  const FastCaptureSettings& fc = recipe.fast_capture;
  FastCapturePlan p;
  p.axis = fast_capture_axis(plan);
  if (p.axis.points > kFastCaptureMaxBins) {
    return make_error(ErrorKind::invalid_argument,
                      fmt::format("recipe {}: fast capture: the plan has {} points, a receiver trace at most {}",
                                  recipe.name, p.axis.points, kFastCaptureMaxBins));
  }
  p.rbw_hz = fc.rbw_hz;
  p.receiver_sweeps = std::max(1, fc.receiver_sweeps);
  const double half_bin = p.axis.bin_hz() / 2;
  p.source_start_hz = p.axis.start_hz - half_bin;
  p.source_stop_hz = p.axis.stop_hz + half_bin;
  const double band = p.source_stop_hz - p.source_start_hz;
  const double min_src = min_source_sweep_s(band, p.rbw_hz);
  p.source_sweep_s = fc.source_sweep_time_s > 0 ? fc.source_sweep_time_s : min_src;
  if (p.source_sweep_s < min_src * (1 - 1e-9)) {
    return make_error(ErrorKind::invalid_argument,
                      fmt::format("recipe {}: fast_capture.source_sweep_time_s {} s is too short: over {:.6g} MHz at RBW "
                                  "{:.6g} kHz the source ramp needs at least {:.6g} s",
                                  recipe.name, p.source_sweep_s, band / 1e6, p.rbw_hz / 1e3, min_src));
  }
  const double min_rx = min_receiver_sweep_s(p.axis.points, p.source_sweep_s);
  p.receiver_sweep_s = fc.receiver_sweep_time_s > 0 ? fc.receiver_sweep_time_s : kDwellMargin * min_rx;
  if (p.receiver_sweep_s < min_rx * (1 - 1e-9)) {
    return make_error(ErrorKind::invalid_argument,
                      fmt::format("recipe {}: fast_capture.receiver_sweep_time_s {} s is too short: {} bins must each "
                                  "dwell one source ramp of {:.6g} s, at least {:.6g} s",
                                  recipe.name, p.receiver_sweep_s, p.axis.points, p.source_sweep_s, min_rx));
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
    if (plan.size() != trace_dbm.size()) {
      return make_error(ErrorKind::protocol, fmt::format("fast capture: the trace has {} values, the plan {} points",
                                                         trace_dbm.size(), plan.size()));
    }
    for (std::size_t i = 0; i < plan.size(); ++i) out.push_back(Reading{plan[i], trace_dbm[i]});
    return out;
  }
  const double bin = axis.bin_hz();
  const std::size_t last = trace_dbm.size() - 1;
  for (double f : plan) {
    const double x = std::clamp((f - axis.start_hz) / bin, 0.0, static_cast<double>(last));
    const std::size_t i = std::min(static_cast<std::size_t>(std::floor(x)), last == 0 ? 0 : last - 1);
    const double w = x - static_cast<double>(i);
    const double v = last == 0 ? trace_dbm[0] : trace_dbm[i] * (1 - w) + trace_dbm[i + 1] * w;
    out.push_back(Reading{f, v});
  }
  return out;
}

}  // namespace echoline::core
