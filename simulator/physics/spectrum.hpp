// Receiver behaviour of the simulated spectrum analyzer: resolution-filter shape and sweep time.
// Pure functions, callable from any thread.
#pragma once

namespace echoline::sim {

// Gaussian RBW filter shape in dB: 0 dB at 0 offset, -3.01 dB at +-rbw/2.
// REQUIRES: rbw_hz > 0.
double rbw_response_db(double offset_hz, double rbw_hz);

// Sweep time k*span/RBW^2 (common practice), lengthened by (RBW/VBW) when VBW < RBW;
// never shorter than kMinSweepTimeS; zero span takes kZeroSpanSweepTimeS. REQUIRES: rbw_hz > 0, vbw_hz > 0.
double sweep_time_s(double span_hz, double rbw_hz, double vbw_hz, double k = 2.5);

// The shortest swept measurement the simulated analyzer makes, seconds.
inline constexpr double kMinSweepTimeS = 100e-6;
// The time of one zero-span (fixed-frequency) trace, seconds.
inline constexpr double kZeroSpanSweepTimeS = 1e-3;

}  // namespace echoline::sim
