// IEEE 488.2 §11 status model and common commands, SCPI-99 Vol 2 §21.8 error queue
// (SCPI-1999 Vol 2 §21.8; IEEE 488.2 §10 and §11, section numbers from memory).
#include <gtest/gtest.h>

#include <nlohmann/json.hpp>

#include "simulator/instrument.hpp"
#include "simulator/status_model.hpp"

namespace echoline::sim {
namespace {

class Common : public ::testing::Test {
 protected:
  World world;
  std::unique_ptr<SimInstrument> src = make_source_instrument(world, nlohmann::json::object());
  std::unique_ptr<SimInstrument> rx = make_receiver_instrument(world, nlohmann::json::object());

  static std::string ask(SimInstrument& i, std::string_view m) {
    auto r = i.handle(m);
    EXPECT_EQ(r.size(), 1u) << m;
    return r.empty() ? std::string() : r[0].text;
  }
  std::string ask(std::string_view m) { return ask(*src, m); }
  int ask_int(std::string_view m) { return std::stoi(ask(m)); }
};

// SCPI-99 Vol 2 §21.8: an empty queue reads 0,"No error".
TEST_F(Common, EmptyQueueReadsNoError) {
  EXPECT_EQ(ask("SYST:ERR?"), "0,\"No error\"");
  EXPECT_EQ(ask("SYSTem:ERRor:NEXT?"), "0,\"No error\"");
}

// SCPI-99 Vol 2 §21.8: FIFO, <code>,"<text>", the standard text first.
TEST_F(Common, ErrorsComeOutOldestFirstWithStandardText) {
  src->handle("FREQU 1");
  src->handle("FREQ 9 GHZ");
  EXPECT_EQ(ask("SYST:ERR:COUN?"), "2");
  EXPECT_EQ(ask("SYST:ERR?").rfind("-113,\"Undefined header", 0), 0u);
  EXPECT_EQ(ask("SYST:ERR?").rfind("-222,\"Data out of range", 0), 0u);
  EXPECT_EQ(ask("SYST:ERR?"), "0,\"No error\"");
}

// SCPI-99 Vol 2 §21.8: on overflow the last entry is replaced by -350; the first
// capacity-1 entries are kept.
TEST(StatusQueue, OverflowReplacesTheLastEntry) {
  StatusModel s(16);
  for (int i = 0; i < 20; ++i) s.push_error(-200 - i % 25);  // -200, -201, ... (20 errors)
  for (int i = 0; i < 15; ++i) {
    EXPECT_EQ(std::stoi(s.pop_error()), -200 - i) << "entry " << i;
  }
  EXPECT_EQ(s.pop_error(), "-350,\"Queue overflow\"");
  EXPECT_EQ(s.pop_error(), "0,\"No error\"");
  // After draining, the queue works normally again.
  s.push_error(-222);
  EXPECT_EQ(std::stoi(s.pop_error()), -222);
}

TEST(StatusQueue, ExactlyFullIsNotAnOverflow) {
  StatusModel s(16);
  for (int i = 0; i < 16; ++i) s.push_error(-100);
  s.read_esr();
  for (int i = 0; i < 16; ++i) EXPECT_EQ(std::stoi(s.pop_error()), -100);
  EXPECT_EQ(s.pop_error(), "0,\"No error\"");
}

// IEEE 488.2 §11.5.1: PON at power on; error classes set CME/EXE/DDE/QYE; *ESR? reads and clears.
TEST_F(Common, EsrReadsAndClears) {
  EXPECT_EQ(ask_int("*ESR?"), 128);        // PON
  EXPECT_EQ(ask_int("*ESR?"), 0);          // cleared by the read
  src->handle("FREQU 1");                  // -113 command error
  EXPECT_EQ(ask_int("*ESR?"), 32);         // CME
  src->handle("FREQ 9 GHZ");               // -222 execution error
  EXPECT_EQ(ask_int("*ESR?"), 16);         // EXE
  src->query_interrupted();                // -410 query error
  EXPECT_EQ(ask_int("*ESR?"), 4);          // QYE
  src->push_error(-300, "Device-specific error;test");
  EXPECT_EQ(ask_int("*ESR?"), 8);          // DDE
}

// IEEE 488.2 §10.3: *CLS clears the event register and queue, not the enable registers.
TEST_F(Common, ClsClearsEventsAndQueueNotEnables) {
  src->handle("*ESE 36;*SRE 32");
  src->handle("FREQU 1");
  src->handle("*CLS");
  EXPECT_EQ(ask_int("*ESR?"), 0);
  EXPECT_EQ(ask("SYST:ERR?"), "0,\"No error\"");
  EXPECT_EQ(ask_int("*ESE?"), 36);
  EXPECT_EQ(ask_int("*SRE?"), 32);
}

// IEEE 488.2 §10.34: *SRE ignores bit 6; §10.10: *ESE 0..255, else -222.
TEST_F(Common, EnableRegisters) {
  src->handle("*SRE 255");
  EXPECT_EQ(ask_int("*SRE?"), 191);
  src->handle("*ESE 256");
  EXPECT_EQ(std::stoi(ask("SYST:ERR?")), -222);
  src->handle("*ESE #H24");
  EXPECT_EQ(ask_int("*ESE?"), 36);
}

// IEEE 488.2 §11.2 and SCPI-99 (bit 2 = queue not empty): *STB?.
TEST_F(Common, StatusByteSummarisesQueueAndEsr) {
  src->handle("*CLS");
  EXPECT_EQ(ask_int("*STB?"), 0);
  src->handle("FREQU 1");                  // CME into ESR, entry into the queue
  EXPECT_EQ(ask_int("*STB?"), 4);          // ESE = 0: no ESB yet
  src->handle("*ESE 32");
  EXPECT_EQ(ask_int("*STB?"), 4 | 32);     // ESB
  src->handle("*SRE 32");
  EXPECT_EQ(ask_int("*STB?"), 4 | 32 | 64);  // MSS
}

// IEEE 488.2 §10.19: *OPC? returns 1 and does not set ESR bit 0; §10.18: *OPC sets it.
TEST_F(Common, OpcQueryAndOpcCommand) {
  src->handle("*CLS");
  EXPECT_EQ(ask("*OPC?"), "1");
  EXPECT_EQ(ask_int("*ESR?"), 0);
  src->handle("*OPC");
  EXPECT_EQ(ask_int("*ESR?"), 1);
}

// *OPC during a receiver sweep: bit 0 only once the sweep time has passed on the sim clock;
// *OPC? carries the remaining sweep time as its delay.
TEST_F(Common, OpcWaitsForThePendingSweep) {
  rx->handle("*CLS;FREQ:SPAN 100 MHZ;:BAND 100 KHZ;:BAND:VID 100 KHZ");
  const double sweep = std::stod(ask(*rx, "SWE:TIME?"));
  EXPECT_NEAR(sweep, 0.025, 1e-9);         // 2.5 * 100 MHz / (100 kHz)^2 (k = 2.5 for analog near-Gaussian RBW filters, common practice)
  world.now_s = 10;
  auto r = rx->handle("INIT;*OPC?");
  ASSERT_EQ(r.size(), 1u);
  EXPECT_EQ(r[0].text, "1");
  EXPECT_NEAR(r[0].delay_s, sweep, 1e-12);
  rx->handle("INIT;*OPC");
  EXPECT_EQ(std::stoi(ask(*rx, "*ESR?")) & 1, 0);
  world.now_s = 10 + sweep + 1e-6;
  EXPECT_EQ(std::stoi(ask(*rx, "*ESR?")) & 1, 1);
}

// IEEE 488.2 §10.39: *WAI makes later replies wait for the pending sweep.
TEST_F(Common, WaiDelaysLaterReplies) {
  world.now_s = 1;
  auto r = rx->handle("INIT;*WAI;FREQ:CENT?");
  ASSERT_EQ(r.size(), 1u);
  EXPECT_GT(r[0].delay_s, 0.0);
}

// IEEE 488.2 §10.32: *RST resets settings, not the status or the queue.
TEST_F(Common, RstKeepsStatusAndQueue) {
  src->handle("FREQ 2 GHZ;*ESE 32");
  src->handle("FREQU 1");
  src->handle("*RST");
  EXPECT_NE(std::stod(ask("FREQ?")), 2e9);
  EXPECT_EQ(ask_int("*ESE?"), 32);
  EXPECT_EQ(std::stoi(ask("SYST:ERR?")), -113);
  EXPECT_EQ(ask("OUTP?"), "0");
}

// IEEE 488.2 §10.14 (from memory): four fields, <= 72 characters; §10.38 *TST? 0;
// SCPI-99 SYSTem:VERSion? 1999.0.
TEST_F(Common, IdentitySelfTestVersion) {
  const std::string id = ask("*IDN?");
  EXPECT_EQ(std::count(id.begin(), id.end(), ','), 3);
  EXPECT_LE(id.size(), 72u);
  EXPECT_EQ(id.rfind("Echoline,SIM-SRC,", 0), 0u);
  EXPECT_EQ(ask("*TST?"), "0");
  EXPECT_EQ(ask("SYST:VERS?"), "1999.0");
  auto custom = make_source_instrument(world, nlohmann::json{{"identity", "Echoline,SIM-SRC,SN42,2.1"}});
  EXPECT_EQ(ask(*custom, "*IDN?"), "Echoline,SIM-SRC,SN42,2.1");
  EXPECT_THROW(make_source_instrument(world, nlohmann::json{{"identity", "only,three,fields"}}), std::invalid_argument);
}

// IEEE 488.2 §6.3.2.3 / §6.3.2.2; SCPI-1999 Vol 2 §21.8 texts: -410 and -420.
TEST_F(Common, QueryInterruptedAndUnterminated) {
  src->query_interrupted();
  src->query_unterminated();
  EXPECT_EQ(ask("SYST:ERR?"), "-410,\"Query INTERRUPTED\"");
  EXPECT_EQ(ask("SYST:ERR?"), "-420,\"Query UNTERMINATED\"");
}

}  // namespace
}  // namespace echoline::sim
