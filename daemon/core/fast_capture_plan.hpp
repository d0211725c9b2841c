// Fast-capture planning: from a recipe's frequency plan to the receiver axis, the source ramp
// and the sweep times, and from the captured trace back to the plan's points. Pure functions of
// values; thread-safe.
//
// Timing rule (the simulator models the same physics, simulator/receiver_instrument.cpp):
//   1. the tone must not cross the RBW faster than a swept analyzer would sweep it:
//      source sweep time >= k x band / RBW^2 with k = 2.5 (the swept-analyzer sweep-time rule for near-Gaussian RBW filters; common practice, from memory);
//   2. every receiver bin must dwell long enough to see one whole source ramp (a sawtooth passes
//      each frequency once per period): receiver sweep time / (bins - 1) >= source sweep time.
//      Edge bins dwell half as long (the analyzer's sweep starts and stops on them), so the
//      automatic receiver sweep time is kDwellMargin = 2 times that minimum.
#pragma once

#include <vector>

#include "daemon/core/recipe.hpp"
#include "daemon/core/run_result.hpp"
#include "drivers/result.hpp"

namespace echoline::core {

inline constexpr double kFastCaptureK = 2.5;          // sweep-time factor (common practice, from memory)
inline constexpr double kFastCaptureMinSweepS = 1e-3; // shortest source ramp accepted, s
inline constexpr double kDwellMargin = 2.0;           // automatic receiver sweep time / minimum
inline constexpr int kFastCaptureMaxBins = 10001;     // receiver trace points (common analyzer limit)

// The receiver axis for a plan: one bin per plan point when the plan is evenly spaced
// (bins_on_plan), otherwise the smallest plan step over the plan's range (points capped at
// kFastCaptureMaxBins) and the trace is interpolated onto the plan.
struct FastCaptureAxis {
  double start_hz = 0, stop_hz = 0;
  int points = 0;             // may exceed kFastCaptureMaxBins: callers check
  bool bins_on_plan = true;
  double bin_hz() const { return points > 1 ? (stop_hz - start_hz) / (points - 1) : 0.0; }
};
// REQUIRES: plan has at least 2 increasing frequencies.
FastCaptureAxis fast_capture_axis(const std::vector<double>& plan);

// The shortest source ramp for rule 1 over `band_hz` at `rbw_hz` (at least kFastCaptureMinSweepS).
double min_source_sweep_s(double band_hz, double rbw_hz);
// The shortest receiver sweep for rule 2.
double min_receiver_sweep_s(int bins, double source_sweep_s);

struct FastCapturePlan {
  FastCaptureAxis axis;
  double source_start_hz = 0, source_stop_hz = 0;   // half a bin beyond each end of the axis
  double source_sweep_s = 0;
  double receiver_sweep_s = 0;
  int receiver_sweeps = 1;
  double rbw_hz = 0;
};
// Resolves the automatic values and checks both rules. Error (invalid_argument) names the
// recipe and the setting at fault.
Result<FastCapturePlan> plan_fast_capture(const Recipe& recipe);

// Readings at the plan's frequencies from the trace (bin i = plan point i when bins_on_plan;
// otherwise linear interpolation in dB between the two nearest bins). Error when the trace
// does not have axis.points values.
Result<std::vector<Reading>> trace_to_plan(const FastCaptureAxis& axis, const std::vector<double>& trace_dbm,
                                           const std::vector<double>& plan);

}  // namespace echoline::core
