// Fast-capture planning: chooses the RBW, the source ramp, the receiver sweep time and the
// arrangement that capture a recipe's plan in the least time the physics allows, within the
// recipe's limits and the instruments'; maps the captured trace back to the plan's points.
// Pure functions of values; thread-safe. The rules and their sources: MEASUREMENT.md §11.
//
// Timing rules (the simulator enforces the same physics, simulator/receiver_instrument.cpp):
//   R1 RBW settling: a tone may cross the RBW no faster than r^2 / k (Hz/s), k = 2.5, the
//      swept-analyzer rule for near-Gaussian filters (common practice, from memory);
//   R2 dwell (one receiver sweep under repeated ramps): while the receiver dwells on a bin the
//      tone must pass it, so the ramp must travel its whole band B relative to the receiver,
//      which itself moves one bin b: dwell >= ramp x (B + b) / B + retrace, and receiver sweep
//      >= (bins - 1) x dwell;
//   R3 revisit (one ramp under repeated max-hold sweeps): each sweep crosses the slow tone once,
//      and successive crossings may be at most one bin apart: ramp >= (B / b) x (sweep +
//      re-arm) + (B / span) x sweep;
//   R4 edge bins: an analyzer's first and last bins dwell half as long (the sweep starts and
//      stops on them), so the axis carries one extra bin beyond each end of the plan and the
//      plan's points are all interior bins.
// Dynamic range: the LOAD must read at least the recipe's margin above the noise floor at the
// chosen RBW (kTB + NF + attenuation).
// Where readings land: each bin reads the unit where tone and receiver meet, up to half a bin
// from the bin frequency, the same offset in every bin of a capture when nothing sets the ramp's
// phase. With the source's ramp-start pulse cabled to the receiver's external trigger, the
// receiver starts at the phase that puts every meeting on its bin, and the offset shrinks to
// what the trigger's timing spread allows. The budget carries the offset as a bounded term
// (frequency_offset_hz here, frequency_offset_db in uncertainty.hpp).
#pragma once

#include <string>
#include <vector>

#include "daemon/core/recipe.hpp"
#include "daemon/core/run_result.hpp"
#include "drivers/result.hpp"

namespace echoline::core {

inline constexpr double kFastCaptureK = 2.5;   // R1 sweep-time factor (common practice, from memory)

// What the instruments allow (from their profiles; defaults are the generic figures).
struct FastCaptureInstruments {
  double source_min_sweep_s = 1e-3, source_max_sweep_s = 1000;   // one ramp
  double source_retrace_s = 0;                                   // ramp end back to start
  double receiver_min_sweep_s = 1e-3, receiver_max_sweep_s = 3600;
  double receiver_rearm_s = 0.01;     // end of one triggered sweep to the start of the next
  int receiver_max_points = 10001;
  int receiver_max_sweeps = 1000;     // max-hold sweeps the capture may trigger
  std::vector<double> rbw_steps_hz;   // the RBWs the receiver offers, increasing
  double noise_figure_db = 25;
  // The source's ramp-start pulse reaches the receiver's external trigger (cable, pulse output,
  // trigger input and the operations all present), with this latency and ± timing spread.
  bool start_pulse_trigger = false;
  double trigger_latency_s = 0;
  double trigger_uncertainty_s = 0;   // pulse output and trigger input together
  double source_time_accuracy = 0;    // ramp time, ± relative (1e-6 = 1 ppm)
  double receiver_time_accuracy = 0;  // sweep time and trigger delay, ± relative
};

// The 1-3-10 series from `lo` to `hi` (the RBW steps of a receiver whose profile names none).
std::vector<double> rbw_series_1_3(double lo_hz, double hi_hz);

// The receiver axis: evenly spaced bins over the plan's range, plus one bin beyond each end
// (R4). bins_on_plan: the plan is evenly spaced and plan point i is bin i + 1; otherwise the bin
// step is the plan's smallest step and the trace is interpolated onto the plan.
struct FastCaptureAxis {
  double start_hz = 0, stop_hz = 0;   // first and last bin (the extra ones)
  int points = 0;                     // may exceed a receiver's limit: callers check
  bool bins_on_plan = true;
  double bin_hz() const { return points > 1 ? (stop_hz - start_hz) / (points - 1) : 0.0; }
};
// REQUIRES: plan has at least 2 increasing frequencies.
FastCaptureAxis fast_capture_axis(const std::vector<double>& plan);

enum class FastArrangement {
  ramps_under_sweep,   // fast repeated source ramps under one slow receiver sweep
  ramp_under_sweeps,   // one slow source ramp under repeated max-hold receiver sweeps
};
const char* to_string(FastArrangement a);

// One candidate the planner weighed.
struct FastCaptureOption {
  double rbw_hz = 0;
  FastArrangement arrangement = FastArrangement::ramps_under_sweep;
  bool feasible = false;
  double capture_s = 0;     // source settle + every receiver sweep and re-arm
  std::string bound;        // the rule or limit that sets the time, or why it is infeasible
};

struct FastCapturePlan {
  FastCaptureAxis axis;
  FastArrangement arrangement = FastArrangement::ramps_under_sweep;
  double source_start_hz = 0, source_stop_hz = 0;   // half a bin beyond the plan's ends
  double source_sweep_s = 0;
  double receiver_sweep_s = 0;
  int receiver_sweeps = 1;
  double rbw_hz = 0;
  double noise_floor_dbm = 0;    // at rbw_hz, with the recipe's attenuation
  double load_dbm = 0;           // the LOAD level the margin was taken from
  double capture_s = 0;          // expected: settle + sweeps + re-arms (command time not included)
  // Ramps under one sweep with the start pulse: the receiver sweep waits for the pulse and
  // starts trigger_delay_s after it, which puts every meeting on its bin's frequency.
  bool triggered = false;
  double trigger_delay_s = 0;
  // The largest distance from a plan frequency to the frequency its reading belongs to: half a
  // bin untriggered, the trigger's timing spread times the meeting's drift rate triggered.
  double frequency_offset_hz = 0;
  std::string reason;            // why this plan: the margin, the binding rule, the runner-up
  std::vector<FastCaptureOption> considered;
};

// Triggered start (ramps under one sweep, dwell exactly R2's): the receiver must start
// bin/(2 R_s) before a ramp starts (R_s = band/ramp), so the delay after the pulse is that
// point of the ramp cycle (ramp + retrace) less the trigger latency, within one cycle.
double start_pulse_delay_s(double ramp_s, double retrace_s, double band_hz, double bin_hz, double latency_s);
// How far a meeting moves per second of timing error: R_r·R_s/(R_s − R_r), R_r = bin/dwell
// (b/C with the dwell exactly R2's, C = ramp + retrace).
double meeting_drift_hz_per_s(double ramp_s, double band_hz, double bin_hz, double dwell_s);
// The triggered capture's offset bound: (b/C)·(spread + delay·a_r) for the start, plus the slide
// of the last plan bin when the two instruments' times disagree, b·i_max·(D/C)·(a_r + a_s).
double triggered_offset_hz(double ramp_s, double retrace_s, double band_hz, double bin_hz, double dwell_s, int last_bin,
                           double delay_s, const FastCaptureInstruments& in);

// R1: the shortest ramp across `band_hz` at `rbw_hz`.
double min_ramp_s(double band_hz, double rbw_hz);

// Chooses the quickest plan. `load_dbm`: the LOAD's expected level at the receiver. Error
// (invalid_argument) names the recipe and the limit no plan meets, with the closest plan.
Result<FastCapturePlan> plan_fast_capture(const Recipe& recipe, const FastCaptureInstruments& instruments,
                                          double load_dbm);

// Readings at the plan's frequencies from the trace (bins_on_plan: plan point i is bin i + 1;
// otherwise linear interpolation in dB between the two nearest bins). Error when the trace
// does not have axis.points values.
Result<std::vector<Reading>> trace_to_plan(const FastCaptureAxis& axis, const std::vector<double>& trace_dbm,
                                           const std::vector<double>& plan);

}  // namespace echoline::core
