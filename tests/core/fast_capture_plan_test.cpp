// The fast-capture planner: the axis with one bin beyond each end, the RBW-settling, dwell and
// revisit rules worked by hand, the LOAD margin against kTB + NF, the choice between the two
// arrangements, the recipe's limits, and the trace mapped back onto the plan.
#include <cmath>
#include <string>
#include <vector>

#include <gtest/gtest.h>

#include "daemon/core/fast_capture_plan.hpp"
#include "daemon/core/recipe.hpp"

namespace echoline::core {
namespace {

// The shipped whip plan: 860-970 MHz in 221 points, 0.5 MHz apart.
Recipe whip(double margin_db = 15, double max_s = 10) {
  Recipe r;
  r.name = "t";
  r.mode = SweepMode::fast_capture;
  r.segments.push_back(Segment{860e6, 970e6, 221});
  r.source.power_dbm = -10;
  r.source.settle_s = 0.001;
  r.receiver.attenuation_db = 10;
  r.fast_capture.min_load_margin_db = margin_db;
  r.fast_capture.max_capture_s = max_s;
  return r;
}

// Instruments like the simulated bench: 1 ms shortest ramp, 0.1 ms shortest receiver sweep,
// RBW in a 1-3 series, NF 24 dB, 5 ms to re-arm a triggered sweep.
FastCaptureInstruments bench() {
  FastCaptureInstruments in;
  in.source_min_sweep_s = 1e-3;
  in.receiver_min_sweep_s = 1e-4;
  in.receiver_rearm_s = 5e-3;
  in.rbw_steps_hz = rbw_series_1_3(10, 10e6);
  in.noise_figure_db = 24;
  return in;
}

// LOAD level at the receiver: -10 dBm - 20 dB coupling - 0.5 dB main line - 2 x 0.3 dB cable -
// 30 dB directivity (the fixture of config/station.jsonc).
constexpr double kLoadDbm = -10 - 20 - 0.5 - 0.6 - 30;

TEST(FastCapturePlan, AxisCarriesOneBinBeyondEachEnd) {
  const FastCaptureAxis a = fast_capture_axis(plan_frequencies(whip()));
  EXPECT_EQ(a.points, 223);
  EXPECT_TRUE(a.bins_on_plan);
  EXPECT_DOUBLE_EQ(a.start_hz, 859.5e6);
  EXPECT_DOUBLE_EQ(a.stop_hz, 970.5e6);
  EXPECT_NEAR(a.bin_hz(), 0.5e6, 1e-3);
  // An uneven plan: bins at the smallest step (1 MHz) over 900-910 MHz, plus the two extra.
  const FastCaptureAxis u = fast_capture_axis({900e6, 901e6, 903e6, 910e6});
  EXPECT_FALSE(u.bins_on_plan);
  EXPECT_EQ(u.points, 13);
  EXPECT_DOUBLE_EQ(u.start_hz, 899e6);
}

TEST(FastCapturePlan, SettlingRuleByHand) {
  // Swept-analyzer rule ST = k x span / RBW^2, k = 2.5 (common practice, from memory):
  // 110.5 MHz at 1 MHz RBW -> 2.5 x 110.5e6 / 1e12 = 0.27625 ms; at 300 kHz -> 3.0694 ms.
  EXPECT_NEAR(min_ramp_s(110.5e6, 1e6), 2.7625e-4, 1e-12);
  EXPECT_NEAR(min_ramp_s(110.5e6, 300e3), 3.069444e-3, 1e-9);
}

TEST(FastCapturePlan, RbwSeries) {
  const std::vector<double> s = rbw_series_1_3(1e3, 1e6);
  EXPECT_EQ(s, (std::vector<double>{1e3, 3e3, 1e4, 3e4, 1e5, 3e5, 1e6}));
}

TEST(FastCapturePlan, WhipOnTheBenchIsRampsUnderOneSweep) {
  auto p = plan_fast_capture(whip(15), bench(), kLoadDbm);
  ASSERT_TRUE(p.ok()) << p.error().message;
  // Noise floor kTB + NF + attenuation: -174 dBm/Hz (kT at 290 K, common practice) + 60 dB
  // (1 MHz) + 24 + 10 = -80 dBm, 18.9 dB under the LOAD at -61.1 dBm (>= 15 asked). 3 MHz
  // would put it at -75.2 dBm, 14.1 dB under: refused.
  EXPECT_DOUBLE_EQ(p->rbw_hz, 1e6);
  EXPECT_NEAR(p->noise_floor_dbm, -80.0, 0.01);
  EXPECT_EQ(p->arrangement, FastArrangement::ramps_under_sweep);
  // R1 needs 0.276 ms over 110.5 MHz; the source's shortest ramp (1 ms) binds.
  EXPECT_DOUBLE_EQ(p->source_sweep_s, 1e-3);
  // R2 with the extended axis: 223 bins, 222 dwells, each one ramp stretched by (221 + 1) / 221
  // (the ramp band is 221 bins; the receiver moves one bin per dwell): 0.2230 s. The edge-bin
  // margin of doubling would have been 2 x 220 x 1 ms = 0.440 s.
  EXPECT_NEAR(p->receiver_sweep_s, 222 * 1e-3 * 222 / 221, 1e-12);
  EXPECT_EQ(p->receiver_sweeps, 1);
  EXPECT_NEAR(p->capture_s, 0.001 + 222 * 1e-3 * 222 / 221, 1e-12);   // + 1 ms settle
  EXPECT_DOUBLE_EQ(p->source_start_hz, 859.75e6);
  EXPECT_DOUBLE_EQ(p->source_stop_hz, 970.25e6);
  EXPECT_NE(p->reason.find("shortest ramp"), std::string::npos) << p->reason;
  EXPECT_NE(p->reason.find("18.9 dB"), std::string::npos) << p->reason;
  // R2 from its definition: over one dwell the ramp moves (dwell / ramp) x B, the receiver one
  // bin; the difference must reach the whole ramp band B.
  const double band = p->source_stop_hz - p->source_start_hz;
  const double dwell = p->receiver_sweep_s / (p->axis.points - 1);
  EXPECT_GE(dwell / p->source_sweep_s * band - p->axis.bin_hz(), band * (1 - 1e-12));
}

// Untriggered, a reading may belong anywhere within half a bin of its frequency; the budget
// carries 0.25 MHz on the whip plan.
TEST(FastCapturePlan, UntriggeredOffsetIsHalfABin) {
  auto p = plan_fast_capture(whip(15), bench(), kLoadDbm);
  ASSERT_TRUE(p.ok()) << p.error().message;
  EXPECT_FALSE(p->triggered);
  EXPECT_NEAR(p->frequency_offset_hz, 0.25e6, 1e-3);
}

// The start-pulse trigger worked by hand (MEASUREMENT.md §11, derived there). Whip plan: ramp
// T = 1 ms over B = 110.5 MHz (R_s = 1.105e11 Hz/s), bin b = 0.5 MHz, no retrace. The receiver
// must start b/(2 R_s) = 2.26244 µs before a ramp starts, i.e. 997.73756 µs after the pulse;
// less the 100 ns trigger latency: 997.63756 µs. The meeting moves R_r·R_s/(R_s − R_r) per
// second of timing error, R_r = b/dwell = 0.5e6/(1e-3·222/221) = 4.97748e8 Hz/s: b/C = 5e8 Hz/s
// exactly (the dwell C + b/R_s makes R_r·R_s/(R_s − R_r) = b/C, C the ramp cycle: one bin per
// cycle of timing error), so a ±20 ns spread leaves ±10.0 Hz (against 0.25 MHz untriggered). The wait for the pulse and the
// delay add at most two ramp cycles to the expected capture.
TEST(FastCapturePlan, StartPulseTriggerByHand) {
  FastCaptureInstruments in = bench();
  in.start_pulse_trigger = true;
  in.trigger_latency_s = 100e-9;
  in.trigger_uncertainty_s = 20e-9;
  auto p = plan_fast_capture(whip(15), in, kLoadDbm);
  ASSERT_TRUE(p.ok()) << p.error().message;
  EXPECT_TRUE(p->triggered);
  EXPECT_NEAR(p->trigger_delay_s, 1e-3 - 0.25e6 / 1.105e11 - 100e-9, 1e-12);
  EXPECT_NEAR(p->trigger_delay_s, 997.63756e-6, 1e-11);
  EXPECT_NEAR(meeting_drift_hz_per_s(1e-3, 110.5e6, 0.5e6, 1e-3 * 222 / 221), 5e8, 1e-3);
  // With a 0.2 ms retrace the cycle is 1.2 ms: b/C = 0.5e6 / 1.2e-3 = 4.1667e8 Hz/s, 8.33 Hz for 20 ns.
  EXPECT_NEAR(meeting_drift_hz_per_s(1e-3, 110.5e6, 0.5e6, 1.2e-3 + 0.5e6 / 1.105e11), 0.5e6 / 1.2e-3, 1e-3);
  EXPECT_NEAR(p->frequency_offset_hz, 10.0, 0.01);
  EXPECT_NEAR(p->capture_s, 0.001 + 222 * 1e-3 * 222 / 221 + 2e-3, 1e-12);
  EXPECT_NE(p->reason.find("ramp-start pulse"), std::string::npos) << p->reason;
  // A latency longer than the point wanted wraps into the previous cycle.
  EXPECT_NEAR(start_pulse_delay_s(1e-3, 0, 110.5e6, 0.5e6, 999e-6), 1e-3 - 0.25e6 / 1.105e11 - 999e-6 + 1e-3, 1e-12);
  // A retrace lengthens the cycle the phase is counted in.
  EXPECT_NEAR(start_pulse_delay_s(1e-3, 0.2e-3, 110.5e6, 0.5e6, 0), 1.2e-3 - 0.25e6 / 1.105e11, 1e-12);

  // Times that disagree slide the meetings along the trace: with 1 ppm on each instrument the
  // last plan bin (221) moves 0.5e6 · 221 · (222/221) · 2e-6 = 222 Hz, and the delay's own error
  // (997.64 µs · 1 ppm ≈ 1 ns) 0.50 Hz: 10 + 0.50 + 222 = 232.50 Hz, still far under 0.25 MHz.
  in.source_time_accuracy = 1e-6;
  in.receiver_time_accuracy = 1e-6;
  auto q = plan_fast_capture(whip(15), in, kLoadDbm);
  ASSERT_TRUE(q.ok()) << q.error().message;
  EXPECT_TRUE(q->triggered);
  EXPECT_NEAR(q->frequency_offset_hz, 232.50, 0.01);
  // A sweep time good to 0.3 % (an analog sweep) slides the last bin by 0.5e6 · 222 · 3.001e-3
  // = 0.333 MHz, over half a bin: the trigger is of no use and the plan runs free (0.25 MHz).
  in.receiver_time_accuracy = 3e-3;
  auto r = plan_fast_capture(whip(15), in, kLoadDbm);
  ASSERT_TRUE(r.ok()) << r.error().message;
  EXPECT_FALSE(r->triggered);
  EXPECT_NEAR(r->frequency_offset_hz, 0.25e6, 1e-3);
}

// The trigger fixes the phase only with the dwell exactly R2's. With one slow ramp under many
// sweeps (a source whose shortest ramp is 2 s), each crossing lands where it will: half a bin.
TEST(FastCapturePlan, SlowRampArrangementIsNotTriggered) {
  FastCaptureInstruments in = bench();
  in.source_min_sweep_s = 2;
  in.start_pulse_trigger = true;
  in.trigger_uncertainty_s = 20e-9;
  auto p = plan_fast_capture(whip(15), in, kLoadDbm);
  ASSERT_TRUE(p.ok()) << p.error().message;
  EXPECT_EQ(p->arrangement, FastArrangement::ramp_under_sweeps);
  EXPECT_FALSE(p->triggered);
  EXPECT_NEAR(p->frequency_offset_hz, 0.25e6, 1e-3);
}

TEST(FastCapturePlan, TighterMarginNarrowsTheRbwAndLengthensTheRamp) {
  // 20 dB: 1 MHz (18.9 dB) refused, 300 kHz floor -174 + 54.77 + 34 = -85.2 dBm, 24.1 dB under.
  auto p = plan_fast_capture(whip(20), bench(), kLoadDbm);
  ASSERT_TRUE(p.ok()) << p.error().message;
  EXPECT_DOUBLE_EQ(p->rbw_hz, 300e3);
  EXPECT_NEAR(p->source_sweep_s, 3.069444e-3, 1e-9);   // R1 binds: 2.5 x 110.5 MHz / (300 kHz)^2
  EXPECT_NEAR(p->receiver_sweep_s, 222 * 3.069444e-3 * 222 / 221, 1e-6);
  EXPECT_NE(p->reason.find("R1"), std::string::npos) << p->reason;
}

TEST(FastCapturePlan, SlowSourceRampsChooseMaxHoldSweeps) {
  // A generator whose shortest ramp is 50 ms: one receiver sweep would take 222 x 50 ms = 11.1 s.
  // A receiver that re-arms in 1 ms: sweep over the 111 MHz axis 2.5 x 111 MHz / (1 MHz)^2 =
  // 0.2775 ms (R1), cycle 1.2775 ms; the ramp lets the source stay one cycle in each of its 221
  // bins, and the receiver needs (110.5 / 111) x 0.2775 ms more to catch up with the tone between
  // crossings: 221 x 1.2775 ms + 0.2763 ms = 0.28260 s; sweeps ceil(0.2826 s / 1.2775 ms) + 1 = 223.
  FastCaptureInstruments in = bench();
  in.source_min_sweep_s = 0.05;
  in.receiver_rearm_s = 1e-3;
  auto p = plan_fast_capture(whip(15), in, kLoadDbm);
  ASSERT_TRUE(p.ok()) << p.error().message;
  EXPECT_EQ(p->arrangement, FastArrangement::ramp_under_sweeps);
  EXPECT_DOUBLE_EQ(p->rbw_hz, 1e6);
  EXPECT_NEAR(p->receiver_sweep_s, 2.775e-4, 1e-12);
  EXPECT_NEAR(p->source_sweep_s, 221 * 1.2775e-3 + 110.5 / 111 * 2.775e-4, 1e-9);
  EXPECT_EQ(p->receiver_sweeps, 223);
  EXPECT_NEAR(p->capture_s, 0.001 + 223 * 2.775e-4 + 222 * 1e-3, 1e-9);
  // R3 from its definition: crossings of successive sweeps (receiver rate Rr = span / sweep,
  // tone rate Rs = band / ramp) are Rr x cycle / (Rr - Rs) apart; the tone moves at most a bin.
  const double rs = (p->source_stop_hz - p->source_start_hz) / p->source_sweep_s;
  const double rr = (p->axis.stop_hz - p->axis.start_hz) / p->receiver_sweep_s;
  EXPECT_LE(rs * rr * 1.2775e-3 / (rr - rs), p->axis.bin_hz() * (1 + 1e-9));
  EXPECT_NE(p->reason.find("other arrangement"), std::string::npos) << p->reason;
}

TEST(FastCapturePlan, RetraceLengthensTheDwell) {
  FastCaptureInstruments in = bench();
  in.source_retrace_s = 0.5e-3;
  auto p = plan_fast_capture(whip(15), in, kLoadDbm);
  ASSERT_TRUE(p.ok()) << p.error().message;
  EXPECT_NEAR(p->receiver_sweep_s, 222 * (1e-3 * 222 / 221 + 0.5e-3), 1e-12);
}

TEST(FastCapturePlan, LimitsAreEnforced) {
  // The LOAD 2 dB above the 10 Hz floor (-174 + 10 + 34 = -130 dBm) cannot give 15 dB.
  auto p = plan_fast_capture(whip(15), bench(), -128);
  ASSERT_FALSE(p.ok());
  EXPECT_NE(p.error().message.find("noise floor"), std::string::npos) << p.error().message;
  // Quickest is 0.224 s; a 0.1 s limit names the key and the quickest plan.
  auto q = plan_fast_capture(whip(15, 0.1), bench(), kLoadDbm);
  ASSERT_FALSE(q.ok());
  EXPECT_NE(q.error().message.find("max_capture_s"), std::string::npos) << q.error().message;
  EXPECT_NE(q.error().message.find("0.224 s"), std::string::npos) << q.error().message;
  // A receiver holding 201 points cannot take 221 + 2 bins.
  FastCaptureInstruments small = bench();
  small.receiver_max_points = 201;
  auto s = plan_fast_capture(whip(15), small, kLoadDbm);
  ASSERT_FALSE(s.ok());
  EXPECT_NE(s.error().message.find("223 points"), std::string::npos) << s.error().message;
}

TEST(FastCapturePlan, TraceMapsOntoThePlan) {
  const std::vector<double> plan{900e6, 901e6, 902e6};
  const FastCaptureAxis a = fast_capture_axis(plan);
  ASSERT_EQ(a.points, 5);
  auto r = trace_to_plan(a, {-1, -2, -3, -4, -5}, plan);
  ASSERT_TRUE(r.ok());
  EXPECT_DOUBLE_EQ((*r)[0].raw_dbm, -2);   // plan point 0 is bin 1
  EXPECT_DOUBLE_EQ((*r)[2].raw_dbm, -4);
  EXPECT_FALSE(trace_to_plan(a, {-1, -2, -3}, plan).ok());
  // Uneven: 900, 901, 903 MHz -> bins 899..904 MHz, 903 MHz is bin 4 exactly.
  const std::vector<double> uneven{900e6, 901e6, 903e6};
  const FastCaptureAxis u = fast_capture_axis(uneven);
  auto v = trace_to_plan(u, {0, -10, -20, -30, -40, -50}, uneven);
  ASSERT_TRUE(v.ok());
  EXPECT_NEAR((*v)[2].raw_dbm, -40, 1e-9);
}

}  // namespace
}  // namespace echoline::core
