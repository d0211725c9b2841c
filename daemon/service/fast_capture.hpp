// The fast-capture engine: the source ramps across the band on its own while the receiver spans
// the whole plan and max-holds; one trace read returns every point. Same inputs and result shape
// as SweepEngine::run (sweep_engine.hpp), for test runs and calibration standards alike.
// Threading: synchronous; call from one worker thread. cancel may be set from any thread.
// Safety: the source output is switched OFF (and the source put back to CW) at the end and on
// every abort path; the worst-case receiver input is checked before anything is sent. Each
// step stamps the engine heartbeat (engine_heartbeat.hpp) for the watchdog.
#pragma once

#include <atomic>

#include "daemon/core/fast_capture_plan.hpp"
#include "daemon/core/recipe.hpp"
#include "daemon/service/sweep_engine.hpp"
#include "drivers/receiver.hpp"
#include "drivers/source.hpp"

namespace echoline::service {

// Runs recipe in fast-capture mode with `plan` (core::plan_fast_capture for this station's
// profiles and fixture): one receiver sweep under repeated source ramps, or max-hold receiver
// sweeps under one slow ramp, as the plan says. Never throws; an
// instrument error, a timeout or cancellation ends it with `error` set and no readings (a capture
// is all or nothing). Readings: one per plan frequency; bins land on the plan points when the
// plan is evenly spaced (the axis has one extra bin beyond each end), otherwise the trace is
// interpolated (core::trace_to_plan).
// REQUIRES profiles with the operations of core::fast_capture_operations (instrument_needs.hpp):
// source sweep_mode, sweep_start, sweep_stop, sweep_time; receiver set_points, set_sweep_time,
// set_sweep_time_auto, max_hold_on, max_hold_off. Every line sent comes from the profiles or the
// recipe. The receiver's sweep time is put back to automatic at the end; its point count is left
// as set here.
SweepOutcome run_fast_capture(drivers::Source& source, drivers::Receiver& receiver, const core::Recipe& recipe,
                              const core::FastCapturePlan& plan, const std::atomic<bool>& cancel, const ProgressFn& progress = {},
                              SweepOptions options = {});

}  // namespace echoline::service
