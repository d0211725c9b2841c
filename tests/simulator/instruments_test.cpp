// The simulated source, receiver and switch on one World: ranges, settling, the antenna dip,
// trace formats, the noise floor and overload (IEEE 488.2, SCPI-1999; kTB noise floor, common practice).
#include <gtest/gtest.h>

#include <algorithm>
#include <cmath>
#include <cstring>

#include <nlohmann/json.hpp>

#include "simulator/instrument.hpp"
#include "simulator/physics/dut_models.hpp"

namespace echoline::sim {
namespace {

class Bench : public ::testing::Test {
 protected:
  World world;
  std::unique_ptr<SimInstrument> src = make_source_instrument(world, nlohmann::json{{"seed", 3}});
  std::unique_ptr<SimInstrument> rx = make_receiver_instrument(world, nlohmann::json{{"seed", 5}});

  static std::string ask(SimInstrument& i, std::string_view m) {
    auto r = i.handle(m);
    EXPECT_EQ(r.size(), 1u) << m;
    return r.empty() ? std::string() : r[0].text;
  }
  static double num(SimInstrument& i, std::string_view m) { return std::stod(ask(i, m)); }
  static std::string no_error(SimInstrument& i) { return ask(i, "SYST:ERR?"); }

  // One stepped point the way a station measures: tune, wait for settling, sweep, peak.
  double peak_at(double f_hz) {
    world.now_s += 0.1;
    src->handle("FREQ " + std::to_string(f_hz));
    rx->handle("FREQ:CENT " + std::to_string(f_hz));
    world.now_s += 0.01;                   // past the 2 ms settling time
    rx->handle("INIT");
    world.now_s += 1;
    rx->handle("CALC:MARK:MAX");
    return num(*rx, "CALC:MARK:Y?");
  }
};

// SCPI-99 Vol 2 §21.8: -222 Data out of range; the setting stays as it was.
TEST_F(Bench, OutOfRangeFrequencyIsRefusedAndKept) {
  src->handle("FREQ 915 MHZ");
  src->handle("FREQ 7 GHZ");
  EXPECT_EQ(ask(*src, "SYST:ERR?").rfind("-222,\"Data out of range", 0), 0u);
  EXPECT_DOUBLE_EQ(num(*src, "FREQ?"), 915e6);
  src->handle("POW 30");                    // above the 20 dBm top of the range
  EXPECT_EQ(std::stoi(ask(*src, "SYST:ERR?")), -222);
  rx->handle("FREQ:CENT 10 GHZ");
  EXPECT_EQ(std::stoi(ask(*rx, "SYST:ERR?")), -222);
}

TEST_F(Bench, SourceWritesTheWorldWithItsSettlingTime) {
  world.now_s = 5;
  src->handle("FREQ 2.45 GHZ;POW -10 DBM;OUTP ON");
  EXPECT_DOUBLE_EQ(world.source_frequency_hz, 2.45e9);
  EXPECT_TRUE(world.source_output_on);
  EXPECT_DOUBLE_EQ(world.source_settled_at_s, 5.002);   // settle_s default 2 ms
  // Level accuracy 0.3 dB std: the actual level is near, and not exactly, the setting.
  EXPECT_NEAR(world.source_power_dbm, -10, 1.5);
  const double offset1 = world.source_power_dbm + 10;
  src->handle("POW -20");
  EXPECT_NEAR(world.source_power_dbm + 20, offset1, 0.2);   // the fixed offset dominates
  EXPECT_EQ(no_error(*src), "0,\"No error\"");
}

// The receiver sees the tone only once the source has settled.
TEST_F(Bench, ToneAppearsOnlyAfterSettling) {
  auto slow = make_source_instrument(world, nlohmann::json{{"settle_s", 1.0}});
  world.connected = make_short();
  rx->handle("FREQ:CENT 915 MHZ;SPAN 1 MHZ;:BAND 100 KHZ");
  world.now_s = 0;
  slow->handle("FREQ 915 MHZ;POW 0;OUTP ON");
  rx->handle("INIT;:CALC:MARK:MAX");
  const double before = num(*rx, "CALC:MARK:Y?");
  world.now_s = 2;
  rx->handle("INIT;:CALC:MARK:MAX");
  const double after = num(*rx, "CALC:MARK:Y?");
  EXPECT_LT(before, -80);                  // noise only (floor near -100 dBm at 100 kHz)
  EXPECT_GT(after, -30);                   // 0 dBm - 20 dB coupling - losses
  EXPECT_EQ(no_error(*rx), "0,\"No error\"");
}

// A 915 MHz antenna (series RLC, textbook; Balanis, Antenna Theory [memory]): the stepped peak readings dip at f0.
TEST_F(Bench, SteppedSweepShowsTheAntennaDip) {
  AntennaParams a{};
  a.element_length_mm = 80;
  a.nominal_length_mm = 80;
  a.nominal_f0_hz = 915e6;
  a.q = 8;
  a.resistance_ohm = 45;
  world.connected = make_antenna(a);
  src->handle("POW 0 DBM;OUTP ON");
  rx->handle("FREQ:SPAN 200 KHZ;:BAND 30 KHZ;:BAND:VID 30 KHZ");
  double best_f = 0, best = 1e9, edge = peak_at(840e6);
  for (double f = 850e6; f <= 980e6; f += 5e6) {
    const double p = peak_at(f);
    if (p < best) { best = p; best_f = f; }
  }
  EXPECT_NEAR(best_f, 915e6, 10e6);
  EXPECT_GT(edge - best, 10.0);            // a good match: well over 10 dB below the band edge
  EXPECT_EQ(no_error(*rx), "0,\"No error\"");
}

std::vector<double> decode_real32(const std::string& block, bool swapped) {
  // IEEE 488.2 §8.7.9 definite block (section number from memory), IEEE 754 single, NORMal = big-endian.
  EXPECT_EQ(block[0], '#');
  const std::size_t n = static_cast<std::size_t>(block[1] - '0');
  const std::size_t len = std::stoul(block.substr(2, n));
  EXPECT_EQ(block.size(), 2 + n + len);
  std::vector<double> out;
  for (std::size_t i = 2 + n; i + 4 <= block.size(); i += 4) {
    unsigned char b[4];
    std::memcpy(b, block.data() + i, 4);
    if (swapped) std::reverse(b, b + 4);
    const std::uint32_t u = (std::uint32_t{b[0]} << 24) | (std::uint32_t{b[1]} << 16) | (std::uint32_t{b[2]} << 8) | b[3];
    float f;
    std::memcpy(&f, &u, 4);
    out.push_back(f);
  }
  return out;
}

// SCPI-99 FORMat[:DATA] REAL,32 and FORMat:BORDer (SCPI-99 FORMat subsystem, from memory).
TEST_F(Bench, Real32TraceMatchesAscii) {
  world.connected = make_short();
  src->handle("FREQ 915 MHZ;POW -10;OUTP ON");
  world.now_s = 1;
  rx->handle("FREQ:CENT 915 MHZ;SPAN 10 MHZ;:SWE:POIN 101;:INIT");
  std::vector<double> ascii;
  {
    const std::string text = ask(*rx, "TRAC? TRACE1");
    std::size_t pos = 0;
    while (pos <= text.size()) {
      std::size_t comma = text.find(',', pos);
      if (comma == std::string::npos) comma = text.size();
      ascii.push_back(std::stod(text.substr(pos, comma - pos)));
      pos = comma + 1;
    }
  }
  ASSERT_EQ(ascii.size(), 101u);
  rx->handle("FORM REAL,32;FORM:BORD NORM");
  EXPECT_EQ(ask(*rx, "FORM?"), "REAL,32");
  const auto normal = decode_real32(ask(*rx, "TRAC:DATA? TRACE1"), false);
  rx->handle("FORM:BORD SWAP");
  const auto swapped = decode_real32(ask(*rx, "TRAC? TRACE1"), true);
  ASSERT_EQ(normal.size(), ascii.size());
  ASSERT_EQ(swapped.size(), ascii.size());
  for (std::size_t i = 0; i < ascii.size(); ++i) {
    EXPECT_NEAR(normal[i], ascii[i], 1e-6 * std::abs(ascii[i]) + 1e-9) << i;   // float precision
    EXPECT_EQ(normal[i], swapped[i]) << i;
  }
  EXPECT_EQ(no_error(*rx), "0,\"No error\"");
}

// Common practice, no source: floor = -174 dBm/Hz + 10 log10(RBW) + NF. With the source off and
// nothing connected, the mean linear power of a sample-detector trace sits on that floor.
TEST_F(Bench, DisconnectedNoiseFloorIsKtbPlusNoiseFigure) {
  rx->handle("FREQ:CENT 915 MHZ;SPAN 10 MHZ;:BAND 100 KHZ;:DET SAMP;:AVER:COUN 10;:AVER ON;:INIT");
  std::string text = ask(*rx, "TRAC? TRACE1");
  double sum_mw = 0;
  int n = 0;
  std::size_t pos = 0;
  while (pos <= text.size()) {
    std::size_t comma = text.find(',', pos);
    if (comma == std::string::npos) comma = text.size();
    sum_mw += std::pow(10.0, std::stod(text.substr(pos, comma - pos)) / 10.0);
    ++n;
    pos = comma + 1;
  }
  const double mean_dbm = 10 * std::log10(sum_mw / n);
  const double expected = -174 + 10 * std::log10(100e3) + 24;   // -100 dBm, NF 24 dB default
  EXPECT_NEAR(mean_dbm, expected, 0.5);
  EXPECT_EQ(no_error(*rx), "0,\"No error\"");
}

// The positive-peak detector reads noise higher than the sample detector when a trace bin
// spans many RBWs (common practice, no source).
TEST_F(Bench, PositiveDetectorReadsNoiseHigher) {
  rx->handle("FREQ:CENT 915 MHZ;SPAN 100 MHZ;:BAND 30 KHZ;:DET SAMP;:INIT;:CALC:MARK:MAX");
  const double sample_peak = num(*rx, "CALC:MARK:Y?");
  rx->handle("DET POS;INIT");
  const std::string text = ask(*rx, "TRAC? TRACE1");
  const double first = std::stod(text.substr(0, text.find(',')));
  EXPECT_GT(first, -174 + 10 * std::log10(30e3) + 24);   // above the mean floor
  EXPECT_LT(sample_peak, -80);
}

// Overload above the max safe input: reading limited, -300 queued (a real analyzer can be
// damaged there: keep real benches below it).
TEST_F(Bench, OverloadQueuesADeviceErrorAndLimitsTheReading) {
  auto fragile = make_receiver_instrument(world, nlohmann::json{{"max_safe_input_dbm", -30}});
  world.connected = make_short();          // full reflection: about -21 dBm at the receiver
  src->handle("FREQ 915 MHZ;POW 0;OUTP ON");
  world.now_s = 1;
  fragile->handle("FREQ:CENT 915 MHZ;SPAN 1 MHZ;:INIT;:CALC:MARK:MAX");
  EXPECT_LE(num(*fragile, "CALC:MARK:Y?"), -30.0);
  const std::string e = ask(*fragile, "SYST:ERR?");
  EXPECT_EQ(e.rfind("-300,\"Device-specific error;input overload", 0), 0u) << e;
  EXPECT_EQ(std::stoi(ask(*fragile, "*ESR?")) & 8, 8);   // DDE (IEEE 488.2 §11.5.1)
}

TEST_F(Bench, MaxHoldKeepsTheHighestReading) {
  world.connected = make_short();
  src->handle("FREQ 915 MHZ;POW -10;OUTP ON");
  world.now_s = 1;
  rx->handle("FREQ:CENT 915 MHZ;SPAN 1 MHZ;:TRAC:MODE MAXH;:INIT;:CALC:MARK:MAX");
  const double first = num(*rx, "CALC:MARK:Y?");
  src->handle("OUTP OFF");
  world.now_s = 2;
  rx->handle("INIT;:CALC:MARK:MAX");
  EXPECT_DOUBLE_EQ(num(*rx, "CALC:MARK:Y?"), first);   // held despite the source going off
  rx->handle("TRAC:MODE WRIT;:INIT;:CALC:MARK:MAX");
  EXPECT_LT(num(*rx, "CALC:MARK:Y?"), first - 30);
}

TEST_F(Bench, TraceBeforeAnySweepIsStale) {
  EXPECT_TRUE(rx->handle("TRAC? TRACE1").empty());
  EXPECT_EQ(std::stoi(ask(*rx, "SYST:ERR?")), -230);   // SCPI-99 Vol 2 §21.8 Data corrupt or stale
  rx->handle("INIT");
  rx->handle("TRAC? TRACE2");
  EXPECT_EQ(std::stoi(ask(*rx, "SYST:ERR?")), -224);
}

TEST_F(Bench, ReceiverAxisAndSettingsRoundTrip) {
  rx->handle("FREQ:STAR 902 MHZ;STOP 928 MHZ");
  EXPECT_DOUBLE_EQ(num(*rx, "FREQ:CENT?"), 915e6);
  EXPECT_DOUBLE_EQ(num(*rx, "FREQ:SPAN?"), 26e6);
  rx->handle("SENS:BWID:RES 10 KHZ;:BAND:VID 3 KHZ;:DISP:WIND:TRAC:Y:SCAL:RLEV -20 DBM;:INP:ATT 10 DB;:SWE:POIN 201");
  EXPECT_EQ(no_error(*rx), "0,\"No error\"");
  EXPECT_DOUBLE_EQ(num(*rx, "BAND?"), 10e3);
  EXPECT_DOUBLE_EQ(num(*rx, "BWID:VID?"), 3e3);
  EXPECT_DOUBLE_EQ(num(*rx, "DISP:TRAC:Y:RLEV?"), -20);
  EXPECT_DOUBLE_EQ(num(*rx, "INP:ATT?"), 10);
  EXPECT_DOUBLE_EQ(num(*rx, "SWE:POIN?"), 201);
  EXPECT_EQ(ask(*rx, "DET?"), "POS");
  rx->handle("SWE:POIN 1");
  EXPECT_EQ(std::stoi(ask(*rx, "SYST:ERR?")), -222);
}

// ROUTe:CLOSe (@n) selects a standard; DUT gives back the unit it displaced.
TEST_F(Bench, SwitchConnectsStandardsAndRestoresTheDut) {
  auto sw = make_switch_instrument(world, nlohmann::json::object());
  AntennaParams a{80, 80, 915e6, 8, 45, 0};
  world.connected = make_antenna(a);
  world.connected_name = "WH915A-0001";
  sw->handle("ROUT:CLOS (@2)");
  EXPECT_EQ(world.connected_name, "SHORT");
  EXPECT_EQ(ask(*sw, "ROUT:CLOS? (@2)"), "1");
  EXPECT_EQ(ask(*sw, "ROUT:CLOS? (@1,2,3)"), "0,1,0");
  sw->handle("ROUT:CLOS (@1)");
  EXPECT_EQ(world.connected_name, "OPEN");
  sw->handle("ROUT:CLOS (@4)");
  EXPECT_EQ(world.connected_name, "WH915A-0001");
  ASSERT_NE(world.connected, nullptr);
  EXPECT_LT(std::abs(world.connected->gamma(915e6)), 0.5);   // the antenna, not a standard
  sw->handle("ROUT:CLOS (@9)");
  EXPECT_EQ(std::stoi(ask(*sw, "SYST:ERR?")), -222);
  sw->handle("ROUT:CLOS 4");
  EXPECT_EQ(std::stoi(ask(*sw, "SYST:ERR?")), -104);
  EXPECT_THROW(make_switch_instrument(world, nlohmann::json{{"positions", {{"1", "DUMMY"}}}}), std::invalid_argument);
}

}  // namespace
}  // namespace echoline::sim
