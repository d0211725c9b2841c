// The receiver's reading noise reaches every reading of a step sweep: each INIT draws new noise
// for every trace bin, so repeated points scatter by about reading_noise_db, and a zero setting
// leaves only the (tiny) thermal noise.
#include <cmath>
#include <string>
#include <vector>

#include <gtest/gtest.h>
#include <nlohmann/json.hpp>

#include "simulator/instrument.hpp"
#include "simulator/physics/dut_models.hpp"

namespace echoline::sim {
namespace {

struct Scatter {
  double mean = 0, sd = 0;
  int distinct = 0;
};

// `n` step-sweep readings of one point, the way the whip915 recipe measures (100 kHz span,
// 10 kHz RBW, positive-peak detector, marker peak), with a LOAD-like flat DUT.
Scatter step_readings(double reading_noise_db, int n) {
  World world;
  world.connected = make_antenna(AntennaParams{.element_length_mm = 78, .nominal_length_mm = 78, .nominal_f0_hz = 915e6,
                                               .q = 9, .resistance_ohm = 45});
  auto src = make_source_instrument(world, nlohmann::json{{"seed", 3}, {"level_accuracy_db", 0}});
  auto rx = make_receiver_instrument(world, nlohmann::json{{"seed", 5}, {"reading_noise_db", reading_noise_db}});
  for (const char* m : {"FREQ 900 MHZ", "POW -10 DBM", "OUTP ON"}) src->handle(m);
  for (const char* m : {"FREQ:CENT 900 MHZ", "FREQ:SPAN 100 KHZ", "BAND 10 KHZ", "BAND:VID 10 KHZ", "INP:ATT 10", "DET POS"}) {
    rx->handle(m);
  }
  EXPECT_EQ(rx->handle("SYST:ERR?").at(0).text, "0,\"No error\"");
  std::vector<double> v;
  for (int i = 0; i < n; ++i) {
    world.now_s += 1;
    rx->handle("INIT");
    world.now_s += 1;
    rx->handle("CALC:MARK1:MAX");
    v.push_back(std::stod(rx->handle("CALC:MARK1:Y?").at(0).text));
  }
  Scatter s;
  for (double x : v) s.mean += x / n;
  for (double x : v) s.sd += (x - s.mean) * (x - s.mean) / (n - 1);
  s.sd = std::sqrt(s.sd);
  for (int i = 1; i < n; ++i) s.distinct += v[static_cast<std::size_t>(i)] != v[static_cast<std::size_t>(i - 1)];
  return s;
}

TEST(ReadingNoise, EveryStepReadingCarriesFreshReadingNoise) {
  const Scatter noisy = step_readings(0.05, 400);
  const Scatter quiet = step_readings(0.0, 400);
  // every reading differs from the one before: the noise is drawn per sweep, per bin
  EXPECT_EQ(noisy.distinct, 399);
  // The marker takes the peak of the bins near the tone (each with its own noise), so the
  // scatter is a little below 0.05 dB and the mean a little above the noiseless level
  // (the largest of several normal draws; order statistics, common practice, no source).
  EXPECT_GT(noisy.sd, 0.02);
  EXPECT_LT(noisy.sd, 0.05);
  EXPECT_GT(noisy.mean - quiet.mean, 0.0);
  EXPECT_LT(noisy.mean - quiet.mean, 0.15);
  // Without reading noise only thermal noise is left: the tone (-48.7 dBm) sits 51 dB above the
  // floor (kTB at 10 kHz + 24 dB NF + 10 dB attenuation = -100 dBm), so a reading moves by
  // 20 log10(1 + 10^(-51/20)) = 0.024 dB at most (common practice, no source)
  EXPECT_LT(quiet.sd, 0.024);
  EXPECT_LT(quiet.sd, noisy.sd / 2);
  std::printf("reading noise 0.05 dB: marker readings sd %.4f dB, mean +%.4f dB over the noiseless mean\n", noisy.sd,
              noisy.mean - quiet.mean);
}

}  // namespace
}  // namespace echoline::sim
