// Fast capture in the simulator: the source's free-running frequency ramp (FREQuency:MODE
// SWEep, STARt, STOP, SWEep:TIME) and a max-held receiver sweep across the band that sees the
// tone in every bin when each bin dwells one whole source ramp; the same readings as a stepped
// CW measurement; what happens when the timing rule or the RBW crossing rule is broken.
#include <gtest/gtest.h>

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <string>
#include <vector>

#include <nlohmann/json.hpp>

#include "simulator/instrument.hpp"
#include "simulator/physics/dut_models.hpp"

namespace echoline::sim {
namespace {

constexpr double kStartHz = 860e6, kStopHz = 970e6;
constexpr int kPoints = 201;
constexpr double kBinHz = (kStopHz - kStartHz) / (kPoints - 1);

class FastCapture : public ::testing::Test {
 protected:
  World world;
  // Reading noise off: the comparisons below test the sweep physics, not the noise model.
  std::unique_ptr<SimInstrument> src = make_source_instrument(world, nlohmann::json{{"seed", 3}});
  std::unique_ptr<SimInstrument> rx = make_receiver_instrument(world, nlohmann::json{{"seed", 5}, {"reading_noise_db", 0}});

  std::string ask(SimInstrument& i, std::string_view m) {
    auto r = i.handle(m);
    EXPECT_EQ(r.size(), 1u) << m;
    return r.empty() ? std::string() : r[0].text;
  }
  double num(SimInstrument& i, std::string_view m) { return std::stod(ask(i, m)); }

  std::vector<double> trace() {
    std::vector<double> out;
    const std::string text = ask(*rx, "TRAC? TRACE1");
    std::size_t pos = 0;
    while (pos < text.size()) {
      std::size_t comma = text.find(',', pos);
      if (comma == std::string::npos) comma = text.size();
      out.push_back(std::stod(text.substr(pos, comma - pos)));
      pos = comma + 1;
    }
    return out;
  }

  // Source ramps half a bin beyond each end of the receiver axis (as the daemon sets it).
  void start_ramp(double ramp_s) {
    world.now_s = 1;
    src->handle("POW -10;:FREQ:STAR " + std::to_string(kStartHz - kBinHz / 2) + ";:FREQ:STOP " +
                std::to_string(kStopHz + kBinHz / 2) + ";:SWE:TIME " + std::to_string(ramp_s) + ";:FREQ:MODE SWE;:OUTP ON");
  }

  // One receiver sweep across the band with max hold, RBW 300 kHz, the given sweep time.
  std::vector<double> capture(double rbw_hz, double rx_sweep_s, double start_s = 2) {
    rx->handle("INIT:CONT OFF;:DET POS;:FREQ:STAR 860 MHZ;:FREQ:STOP 970 MHZ;:SWE:POIN 201");
    rx->handle("BAND " + std::to_string(rbw_hz) + ";:BAND:VID " + std::to_string(rbw_hz));
    rx->handle("SWE:TIME " + std::to_string(rx_sweep_s) + ";:TRAC:MODE MAXH");
    world.now_s = start_s;
    rx->handle("INIT");
    world.now_s = start_s + rx_sweep_s + 1;
    return trace();
  }

  // How far in frequency `after` sits from `before`, bin by bin on the steep, straight sides of a
  // dip (slope and curvature from `before`: central differences, common practice, no source),
  // averaged over each side: the falling side's mean, the rising side's, and their counts.
  struct Sides { double falling = 0, rising = 0; int n_falling = 0, n_rising = 0; };
  static Sides moved_by_side(const std::vector<double>& before, const std::vector<double>& after) {
    Sides s;
    for (std::size_t i = 2; i + 2 < before.size() && i < after.size(); ++i) {
      const double slope = (before[i + 1] - before[i - 1]) / 2;   // dB per bin
      const double curvature = std::abs(before[i + 1] - 2 * before[i] + before[i - 1]);
      if (std::abs(slope) < 0.3 || curvature > 0.2 * std::abs(slope)) continue;
      const double moved = (after[i] - before[i]) / slope * kBinHz;
      if (slope < 0) {
        s.falling += moved;
        ++s.n_falling;
      } else {
        s.rising += moved;
        ++s.n_rising;
      }
    }
    if (s.n_falling > 0) s.falling /= s.n_falling;
    if (s.n_rising > 0) s.rising /= s.n_rising;
    return s;
  }

  // The stepped reference: source CW at each bin frequency, receiver 1 MHz span around it.
  std::vector<double> stepped(double rbw_hz) {
    src->handle("FREQ:MODE CW;:POW -10;:OUTP ON");
    rx->handle("TRAC:MODE WRIT;:SWE:TIME:AUTO ON;:FREQ:SPAN 1 MHZ;:BAND " + std::to_string(rbw_hz) + ";:BAND:VID " +
               std::to_string(rbw_hz));
    std::vector<double> out;
    for (int i = 0; i < kPoints; ++i) {
      const double f = kStartHz + kBinHz * i;
      world.now_s += 1;
      src->handle("FREQ " + std::to_string(f));
      rx->handle("FREQ:CENT " + std::to_string(f));
      world.now_s += 0.01;   // past the 2 ms settling
      rx->handle("INIT");
      world.now_s += 1;
      rx->handle("CALC:MARK:MAX");
      out.push_back(num(*rx, "CALC:MARK:Y?"));
    }
    return out;
  }
};

TEST_F(FastCapture, SourceRampMovesTheToneLinearlyAndRepeats) {
  world.now_s = 10;
  src->handle("FREQ:STAR 900 MHZ;:FREQ:STOP 930 MHZ;:SWE:TIME 10 MS;:FREQ:MODE SWE;:OUTP ON");
  EXPECT_EQ(ask(*src, "FREQ:MODE?"), "SWE");   // SCPI-99 Vol 1 §7.4.1: query returns the short form
  EXPECT_EQ(ask(*src, "SYST:ERR?"), "0,\"No error\"");
  ASSERT_TRUE(world.source_sweeping);
  const double epoch = 10.002;   // the ramp starts once the 2 ms settling time has passed
  EXPECT_DOUBLE_EQ(world.source_sweep_epoch_s, epoch);
  // Linear ramp: a quarter of the way through the period is a quarter of the way up.
  EXPECT_NEAR(world.source_frequency_at(epoch + 0.0025), 907.5e6, 1.0);
  EXPECT_NEAR(world.source_frequency_at(epoch + 0.0099), 929.7e6, 1.0);
  // It repeats: one whole period later the tone is where it was.
  EXPECT_NEAR(world.source_frequency_at(epoch + 0.0125), 907.5e6, 1.0);
  EXPECT_NEAR(world.source_frequency_at(epoch + 3.0025), 907.5e6, 1.0);
  // Back to CW: the tone stays put at the CW frequency.
  src->handle("FREQ 915 MHZ;:FREQ:MODE CW");
  EXPECT_FALSE(world.source_sweeping);
  EXPECT_DOUBLE_EQ(world.source_frequency_at(epoch + 0.0025), 915e6);
}

// SCPI-99 Vol 2 §21.8: -222 Data out of range leaves the setting unchanged.
TEST_F(FastCapture, RampSettingsAreRangeCheckedAndCoupled) {
  src->handle("SWE:TIME 0.1 MS");   // below the 1 ms shortest ramp of the model
  EXPECT_EQ(std::stoi(ask(*src, "SYST:ERR?")), -222);
  EXPECT_DOUBLE_EQ(num(*src, "SWE:TIME?"), 0.01);
  // A start above the stop moves the stop with it (and the other way round).
  src->handle("FREQ:STAR 1 GHZ;:FREQ:STOP 2 GHZ;:FREQ:STAR 3 GHZ");
  EXPECT_DOUBLE_EQ(num(*src, "FREQ:STOP?"), 3e9);
  src->handle("FREQ:STOP 500 MHZ");
  EXPECT_DOUBLE_EQ(num(*src, "FREQ:STAR?"), 500e6);
  EXPECT_EQ(ask(*src, "SYST:ERR?"), "0,\"No error\"");
  src->handle("*RST");
  EXPECT_EQ(ask(*src, "FREQ:MODE?"), "CW");   // *RST: CW
}

TEST_F(FastCapture, ReceiverSweepTimeIsManualOrAutomatic) {
  rx->handle("FREQ:SPAN 100 MHZ;:BAND 1 MHZ;:BAND:VID 1 MHZ");
  const double automatic = num(*rx, "SWE:TIME?");
  EXPECT_NEAR(automatic, 2.5 * 100e6 / (1e6 * 1e6), 1e-9);   // k*span/RBW^2, k = 2.5 (common practice)
  EXPECT_EQ(ask(*rx, "SWE:TIME:AUTO?"), "1");
  rx->handle("SWE:TIME 2");
  EXPECT_DOUBLE_EQ(num(*rx, "SWE:TIME?"), 2.0);
  EXPECT_EQ(ask(*rx, "SWE:TIME:AUTO?"), "0");
  rx->handle("SWE:TIME:AUTO ON");
  EXPECT_DOUBLE_EQ(num(*rx, "SWE:TIME?"), automatic);
}

// Dwell per bin = 2 s / 200 = 10 ms >= the 5 ms ramp: every bin sees the tone's peak, and
// reads what a stepped CW measurement at the same RBW reads. Expected agreement: the ramp
// crosses the 300 kHz RBW with x = 2 ln2 R/(pi B^2) = 0.11 (about 0.03 dB lower), the crossing
// lands within half a bin (0.275 MHz) of the bin frequency, and the CW flatness is 0.03 dB std:
// well inside 0.2 dB on the OPEN (-30 dBm, 65 dB above the noise).
TEST_F(FastCapture, MaxHeldCaptureMatchesSteppedReadingsOnOpen) {
  world.connected = make_open();
  start_ramp(0.005);
  const std::vector<double> fast = capture(300e3, 2.0);
  EXPECT_EQ(ask(*rx, "SYST:ERR?"), "0,\"No error\"");
  const std::vector<double> step = stepped(300e3);
  ASSERT_EQ(fast.size(), step.size());
  double worst = 0;
  for (std::size_t i = 0; i < fast.size(); ++i) worst = std::max(worst, std::abs(fast[i] - step[i]));
  EXPECT_LT(worst, 0.2) << "max |fast - stepped| over the band";
  EXPECT_GT(worst, 0.0);   // the two measurements are not the same numbers
}

// The same on an antenna with its dip (the whip of the demo lot, element at nominal length).
TEST_F(FastCapture, MaxHeldCaptureShowsTheAntennaDip) {
  world.connected = make_antenna(AntennaParams{78.0, 78.0, 915e6, 8.0, 40.0});
  start_ramp(0.005);
  const std::vector<double> fast = capture(300e3, 2.0);
  const std::vector<double> step = stepped(300e3);
  const auto fmin = std::min_element(fast.begin(), fast.end()) - fast.begin();
  const auto smin = std::min_element(step.begin(), step.end()) - step.begin();
  EXPECT_LE(std::abs(fmin - smin), 1) << "the dip falls in the same bin (+-1)";
  for (std::size_t i = 0; i < fast.size(); ++i) {
    EXPECT_NEAR(fast[i], step[i], 0.5) << "bin " << i;   // 0.5 dB: crossing within half a bin of a steep dip
  }
}

// Breaking the timing rule: each bin dwells 1 ms of a 5 ms ramp, so about 4 bins in 5 never
// see the tone in one sweep and read the noise floor, far below the OPEN level.
TEST_F(FastCapture, ShortReceiverSweepLeavesBinsAtTheNoiseFloor) {
  world.connected = make_open();
  start_ramp(0.005);
  const std::vector<double> fast = capture(300e3, 0.2);
  const double open_level = *std::max_element(fast.begin(), fast.end());
  const auto missed = std::count_if(fast.begin(), fast.end(), [&](double v) { return v < open_level - 30; });
  EXPECT_GT(missed, kPoints / 2);
  EXPECT_LT(missed, kPoints);   // some bins still catch it
}

// The dwell rule with the receiver's own motion (daemon/core/fast_capture_plan.hpp, R2): while
// the receiver dwells on a bin it moves one bin b, so relative to it the ramp covers its band B
// less b in one ramp time. A dwell of exactly one ramp (1 s / 200 bins = 5 ms) leaves one bin
// whose tone passes just outside its dwell (derived in MEASUREMENT.md §11); that bin reads the
// tone up to half a bin off its peak. The sweep starts at 2.002 s, the ramp at 1.002 s (after the
// source's 2 ms settling): bin 0's dwell opens half-way through a ramp, which puts bin 100 in
// the middle of the gap, half a bin (0.275 MHz) from the tone: -3.01 x (2 x 0.275 / 0.3)^2 =
// -10 dB at 300 kHz RBW. A dwell of ramp x (B + b) / B = 5 ms x 202 / 201 misses none. Interior
// bins only: the analyzer's first and last bins dwell half as long.
TEST_F(FastCapture, DwellOfOneRampMissesABinAndTheRelativeRuleDoesNot) {
  world.connected = make_open();
  start_ramp(0.005);
  const std::vector<double> step = stepped(300e3);
  start_ramp(0.005);
  const std::vector<double> exact = capture(300e3, 200 * 0.005, 2.002);
  start_ramp(0.005);
  const std::vector<double> relative = capture(300e3, 200 * 0.005 * 202.0 / 201.0, 2.002);
  ASSERT_EQ(exact.size(), step.size());
  int low_exact = 0, low_relative = 0;
  double worst_relative = 0;
  for (std::size_t i = 1; i + 1 < step.size(); ++i) {
    low_exact += exact[i] < step[i] - 3;
    low_relative += relative[i] < step[i] - 3;
    worst_relative = std::max(worst_relative, std::abs(relative[i] - step[i]));
  }
  EXPECT_GE(low_exact, 1);
  EXPECT_NEAR(exact[100] - step[100], -10.0, 1.0);
  EXPECT_EQ(low_relative, 0);
  EXPECT_LT(worst_relative, 0.2);   // as on the OPEN with a 10 ms dwell (test above)
}

// Where a bin's reading lands (MEASUREMENT.md §11, "Where the reading lands"): with one crossing
// per dwell (R2 met with equality) the tone meets the receiver once in each bin, at the frequency
// where the two meet, and that place moves one bin per dwell: every bin reads the unit at the
// same offset d from its frequency, set by the free-running ramp's phase. This is the physics of
// a swept tone under a swept receiver, not a model choice: the analyzer responds only where the
// tone is inside its RBW, and with an RBW above the bin width that is where the two meet. Two
// captures a quarter ramp apart (the receiver then meets the tone a quarter bin, 137.5 kHz,
// further round): on the antenna's steep sides their difference over the slope is the change of
// d. A shift in frequency moves the two sides of the dip the same way in d (a change of level
// would move them oppositely). The slope is the first capture's central difference (common
// practice, no source); the noise (S/N about 50 dB) scatters each bin's estimate by some 30 kHz,
// so the means of the two sides are compared.
TEST_F(FastCapture, EveryBinReadsTheUnitAtOneCommonOffset) {
  world.connected = make_antenna(AntennaParams{78.0, 78.0, 915e6, 40.0, 40.0});   // a narrow part: steep sides
  const double sweep = 200 * 0.005 * 202.0 / 201.0;
  start_ramp(0.005);
  const std::vector<double> a = capture(1e6, sweep, 2.002);
  start_ramp(0.005);
  const std::vector<double> b = capture(1e6, sweep, 2.002 + 0.00125);
  const Sides m = moved_by_side(a, b);   // the change of d, Hz
  ASSERT_GE(m.n_falling, 5);
  ASSERT_GE(m.n_rising, 5);
  const double falling = m.falling, rising = m.rising;
  const int n_falling = m.n_falling, n_rising = m.n_rising;
  EXPECT_NEAR(falling, rising, 0.1 * kBinHz) << "both sides of the dip move by the same d";
  EXPECT_NEAR(std::abs(falling + rising) / 2, kBinHz / 4, 0.1 * kBinHz) << "a quarter ramp later, a quarter bin";
  std::printf("[ offset  ] d moved by %.0f kHz on the falling side (%d bins), %.0f kHz on the rising side (%d bins)\n",
              falling / 1e3, n_falling, rising / 1e3, n_rising);
}

// The start-pulse trigger (MEASUREMENT.md §11, "A shared start"): with the source's ramp-start
// pulse cabled to the receiver's external trigger, a sweep that starts (F0 − s0)/R_s into the
// ramp cycle meets the tone at every bin's own frequency (derived there: the meeting moves one
// bin per dwell of ramp·(B + b)/B, so the phase at the first bin sets all of them). Two
// triggered captures armed a quarter ramp apart then read the same offset (the quarter-ramp pair
// of the test above moved it a quarter bin), and that offset is 0: on the steep sides of the
// dip the capture agrees with the stepped CW reference, both sides alike. The reference's own
// scatter (its 2 ms settling, the peak marker) is some 0.05 dB: common practice, no source.
TEST_F(FastCapture, StartPulseTriggerPutsEveryReadingOnItsBin) {
  world.connected = make_antenna(AntennaParams{78.0, 78.0, 915e6, 40.0, 40.0});   // steep sides, as above
  world.trigger_cable = true;
  world.trigger_latency_s = 100e-9;
  world.trigger_jitter_s = 20e-9;
  const double ramp = 0.005, band = kStopHz - kStartHz + kBinHz;
  const double sweep = 200 * ramp * (band + kBinHz) / band;   // R2 with equality
  const double phase = (kBinHz / 2) / (band / ramp);          // (F0 − s0)/R_s: the axis starts half a bin into the ramp
  start_ramp(ramp);
  const std::vector<double> step = stepped(1e6);
  rx->handle("TRIG:SOUR EXT;:TRIG:DEL " + std::to_string(phase - world.trigger_latency_s));
  EXPECT_EQ(ask(*rx, "TRIG:SOUR?"), "EXT");
  start_ramp(ramp);
  const std::vector<double> a = capture(1e6, sweep, 2.002);
  start_ramp(ramp);
  const std::vector<double> b = capture(1e6, sweep, 2.002 + ramp / 4);
  ASSERT_EQ(a.size(), step.size());
  // A frequency offset moves the two sides' level differences the same way in Hz; a level
  // difference between capture and reference moves them oppositely: the half sum of the two
  // sides' mean offsets is the frequency offset (single bins scatter by some 30 kHz of noise).
  const auto offset_of = [&](const std::vector<double>& x) {
    const Sides m = moved_by_side(step, x);
    EXPECT_GE(m.n_falling, 5);
    EXPECT_GE(m.n_rising, 5);
    return (m.falling + m.rising) / 2;
  };
  const double off_a = offset_of(a), off_b = offset_of(b);
  EXPECT_LT(std::abs(off_a), 0.05 * kBinHz) << "the triggered capture reads at its bins";
  EXPECT_LT(std::abs(off_b - off_a), 0.05 * kBinHz) << "two triggered captures a quarter ramp apart read the same offset";
  std::printf("[ trigger ] offset %.1f kHz and %.1f kHz for two captures armed a quarter ramp apart (bin %.0f kHz)\n",
              off_a / 1e3, off_b / 1e3, kBinHz / 1e3);
}

// An armed sweep waits for its trigger: with no cable the pulse never comes and *OPC? does not
// answer within any time a station waits (as on a real analyzer; the station's *OPC? timeout
// reports it). Back to IMMediate, INIT starts at once.
TEST_F(FastCapture, ExternalTriggerWithoutTheCableNeverStarts) {
  world.connected = make_open();
  start_ramp(0.001);
  rx->handle("TRIG:SOUR EXT");
  rx->handle("INIT:CONT OFF;:SWE:TIME 0.2;:INIT");
  auto r = rx->handle("*OPC?");
  ASSERT_EQ(r.size(), 1u);
  EXPECT_GT(r[0].delay_s, 1e6);
  rx->handle("ABOR;:TRIG:SOUR IMM;:INIT");
  r = rx->handle("*OPC?");
  ASSERT_EQ(r.size(), 1u);
  EXPECT_LE(r[0].delay_s, 0.2 + 1e-9);
}

// Breaking the crossing rule: a 1 ms ramp over 110 MHz crosses a 30 kHz RBW at 1.1e11 Hz/s,
// x = 54 (more than 17 dB of filter loss, more with VBW = RBW): every bin reads well low.
TEST_F(FastCapture, TooFastARampThroughANarrowRbwLosesAmplitude) {
  world.connected = make_open();
  start_ramp(0.001);
  const std::vector<double> fast = capture(30e3, 2.0);
  const std::vector<double> step = stepped(30e3);
  for (std::size_t i = 0; i < fast.size(); i += 20) EXPECT_LT(fast[i], step[i] - 10) << "bin " << i;
}

}  // namespace
}  // namespace echoline::sim
