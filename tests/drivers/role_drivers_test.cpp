// Role drivers (Source, Receiver, Switch) against an in-memory instrument that records the exact
// SCPI text it receives. Common commands per IEEE 488.2 §10 (*RST, *CLS, *OPC?, *IDN?);
// SYST:ERR? and the "0,\"No error\"" reply per SCPI-1999 Vol 2 §21.8.
#include <deque>

#include <gtest/gtest.h>

#include "drivers/memory_transport.hpp"
#include "drivers/profile.hpp"
#include "drivers/receiver.hpp"
#include "drivers/scpi_codec.hpp"
#include "drivers/source.hpp"
#include "drivers/switch.hpp"
#include "tests/support/process.hpp"

namespace echoline::drivers {
namespace {

using Lines = std::vector<std::string>;

// The shipped sim profiles check errors once per sweep (the lean engine); these tests pin the
// drivers' per-step behaviour, so they ask for it explicitly (tests that need another policy
// set their own).
Profile sim_profile(const char* name) {
  Profile p = load_profile(testing::source_dir() / "config" / "instruments" / name);
  p.check_errors = "each-step";
  return p;
}

// A scripted instrument: answers the queries the drivers send, queues errors on request.
struct FakeInstrument {
  std::shared_ptr<MemoryPeer> peer = std::make_shared<MemoryPeer>();
  std::string idn = "Echoline,SIM-SRC,SRC0001,1.0";
  std::deque<std::string> errors;   // SCPI error queue entries, e.g. -222,"Data out of range"
  std::string trace_reply = "-50.5,-49.25,-48";
  std::string raw_trace;            // when set: a block reply for the trace query

  FakeInstrument() {
    peer->set_responder([this](std::string_view line) -> std::string {
      if (line == "*IDN?") return idn + "\n";
      if (line == "*OPC?") return "1\n";
      if (line == "SYST:ERR?") {
        if (errors.empty()) return "0,\"No error\"\n";
        std::string e = errors.front();
        errors.pop_front();
        return e + "\n";
      }
      if (line == "CALC:MARK1:Y?") return "-23.5\n";
      if (line.rfind("TRAC:DATA?", 0) == 0) return raw_trace.empty() ? trace_reply + "\n" : raw_trace + "\n";
      return "";
    });
  }
  std::unique_ptr<ScpiSession> session(const std::string& name, const Profile& profile) {
    auto s = std::make_unique<ScpiSession>(name, std::make_unique<MemoryTransport>(peer, "memory://" + name, name), profile.io);
    EXPECT_TRUE(s->connect().ok());
    return s;
  }
  Lines lines() const { return peer->lines_written(); }
  Lines lines_since(std::size_t n) const {
    const Lines& all = peer->lines_written();
    return Lines(all.begin() + static_cast<std::ptrdiff_t>(n), all.end());
  }
};

TEST(SourceDriver, InitializeAndSettingsSendExactlyTheProfileScpi) {
  Profile p = sim_profile("sim-source.jsonc");
  FakeInstrument inst;
  auto session = inst.session("siggen", p);
  Source src(*session, p);
  ASSERT_TRUE(src.initialize().ok());
  EXPECT_EQ(inst.lines(), (Lines{"*RST", "*CLS", "OUTP OFF", "*OPC?", "SYST:ERR?"}));
  std::size_t n = inst.lines().size();
  ASSERT_TRUE(src.set_frequency(915e6).ok());
  ASSERT_TRUE(src.set_power(-10.5).ok());
  ASSERT_TRUE(src.set_output(true).ok());
  EXPECT_EQ(inst.lines_since(n), (Lines{"FREQ:CW 915000000", "SYST:ERR?", "POW -10.5", "SYST:ERR?", "OUTP ON", "SYST:ERR?"}));
}

TEST(SourceDriver, OutOfRangeIsRefusedBeforeAnythingIsSent) {
  Profile p = sim_profile("sim-source.jsonc");
  FakeInstrument inst;
  auto session = inst.session("siggen", p);
  Source src(*session, p);
  Status s = src.set_frequency(7e9);
  ASSERT_FALSE(s.ok());
  EXPECT_EQ(s.error().kind, ErrorKind::invalid_argument);
  EXPECT_EQ(s.error().message,
            "siggen: set_frequency: 7000000000 Hz is outside the range of profile sim-source (9000 to 6000000000 Hz); nothing sent");
  EXPECT_FALSE(src.set_power(25).ok());
  EXPECT_FALSE(src.post_frequency(1e3).ok());
  EXPECT_FALSE(src.set_frequency(std::numeric_limits<double>::quiet_NaN()).ok());
  EXPECT_TRUE(inst.lines().empty());
}

TEST(SourceDriver, PostFrequencyPipelinesWithoutChecking) {
  Profile p = sim_profile("sim-source.jsonc");
  FakeInstrument inst;
  auto session = inst.session("siggen", p);
  Source src(*session, p);
  ASSERT_TRUE(src.post_frequency(902e6).ok());
  ASSERT_TRUE(src.post_frequency(902.5e6).ok());
  EXPECT_EQ(inst.lines(), (Lines{"FREQ:CW 902000000", "FREQ:CW 902500000"}));
  ASSERT_TRUE(src.sync().ok());
  EXPECT_EQ(inst.lines().back(), "*OPC?");
}

TEST(SourceDriver, InstrumentErrorComesBackWithItsCode) {
  Profile p = sim_profile("sim-source.jsonc");
  FakeInstrument inst;
  inst.errors.push_back("-222,\"Data out of range\"");
  auto session = inst.session("siggen", p);
  Source src(*session, p);
  Status s = src.set_power(-10);
  ASSERT_FALSE(s.ok());
  EXPECT_EQ(s.error().kind, ErrorKind::instrument);
  EXPECT_EQ(s.error().instrument_code, -222);
  EXPECT_NE(s.error().message.find("siggen"), std::string::npos) << s.error().message;
}

TEST(SourceDriver, ErrorPolicyDecidesWhenTheQueueIsRead) {
  Profile p = sim_profile("sim-source.jsonc");
  p.check_errors = "end-of-sweep";
  FakeInstrument inst;
  auto session = inst.session("siggen", p);
  Source src(*session, p);
  ASSERT_TRUE(src.set_frequency(915e6).ok());
  EXPECT_EQ(inst.lines(), (Lines{"FREQ:CW 915000000"}));
  ASSERT_TRUE(src.check_errors().ok());
  EXPECT_EQ(inst.lines().back(), "SYST:ERR?");

  Profile q = p;
  q.check_errors = "never";
  FakeInstrument inst2;
  auto session2 = inst2.session("siggen", q);
  Source src2(*session2, q);
  ASSERT_TRUE(src2.set_frequency(915e6).ok());
  ASSERT_TRUE(src2.check_errors().ok());
  EXPECT_EQ(inst2.lines(), (Lines{"FREQ:CW 915000000"}));
}

TEST(SourceDriver, GenericProfileSendsLongForms) {
  Profile p = sim_profile("generic-scpi-source.jsonc");
  FakeInstrument inst;
  auto session = inst.session("siggen", p);
  Source src(*session, p);
  ASSERT_TRUE(src.set_frequency(2441.75e6).ok());
  EXPECT_EQ(inst.lines().front(), "SOURce:FREQuency:CW 2441750000");
}

ReceiverSetup setup915() {
  ReceiverSetup s;
  s.center_hz = 915e6;
  s.span_hz = 0;
  s.rbw_hz = 10e3;
  s.vbw_hz = 0;
  s.reference_level_dbm = -10;
  s.attenuation_db = 10;
  return s;
}

TEST(ReceiverDriver, InitializeSetsSingleSweepMarkerAndFormat) {
  Profile p = sim_profile("sim-receiver.jsonc");
  FakeInstrument inst;
  auto session = inst.session("analyzer", p);
  Receiver rcv(*session, p);
  ASSERT_TRUE(rcv.initialize().ok());
  // ABORt, TRIGger:SOURce IMMediate and TRIGger:DELay 0 (SCPI-1999 trigger model): a receiver
  // left armed for an external trigger by an interrupted fast capture starts at INIT again.
  EXPECT_EQ(inst.lines(), (Lines{"*RST", "*CLS", "CALC:MARK1:STAT ON", "DET POS", "INIT:CONT OFF", "ABOR", "TRIG:SOUR IMM",
                                 "TRIG:DEL 0", "FORM:DATA ASC", "*OPC?", "SYST:ERR?"}));
  EXPECT_DOUBLE_EQ(rcv.max_safe_input_dbm(), 20);
}

TEST(ReceiverDriver, ConfigureSendsEverySettingThenChecksOnce) {
  Profile p = sim_profile("sim-receiver.jsonc");
  FakeInstrument inst;
  auto session = inst.session("analyzer", p);
  Receiver rcv(*session, p);
  ASSERT_TRUE(rcv.configure(setup915()).ok());
  EXPECT_EQ(inst.lines(), (Lines{"FREQ:CENT 915000000", "FREQ:SPAN 0", "BAND 10000", "BAND:VID 10000",
                                 "DISP:WIND:TRAC:Y:RLEV -10", "INP:ATT 10", "SYST:ERR?"}));
}

TEST(ReceiverDriver, AutoAttenuationWithoutAProfileCommandLeavesItToTheInstrument) {
  Profile p = sim_profile("sim-receiver.jsonc");
  FakeInstrument inst;
  auto session = inst.session("analyzer", p);
  Receiver rcv(*session, p);
  ReceiverSetup s = setup915();
  s.attenuation_db = -1;
  ASSERT_TRUE(rcv.configure(s).ok());
  for (const auto& line : inst.lines()) EXPECT_EQ(line.find("INP:ATT"), std::string::npos) << line;

  Profile g = sim_profile("generic-scpi-receiver.jsonc");
  FakeInstrument inst2;
  auto session2 = inst2.session("analyzer", g);
  Receiver rcv2(*session2, g);
  ASSERT_TRUE(rcv2.configure(s).ok());
  EXPECT_EQ(inst2.lines()[5], "INPut:ATTenuation:AUTO ON");
}

TEST(ReceiverDriver, AnyOutOfRangeSettingSendsNothing) {
  Profile p = sim_profile("sim-receiver.jsonc");
  FakeInstrument inst;
  auto session = inst.session("analyzer", p);
  Receiver rcv(*session, p);
  ReceiverSetup s = setup915();
  s.reference_level_dbm = 45;   // beyond the profile's reference level range
  Status st = rcv.configure(s);
  ASSERT_FALSE(st.ok());
  EXPECT_EQ(st.error().kind, ErrorKind::invalid_argument);
  EXPECT_NE(st.error().message.find("analyzer: set_reference_level: 45 dBm"), std::string::npos) << st.error().message;
  s = setup915();
  s.rbw_hz = 0;
  EXPECT_FALSE(rcv.configure(s).ok());
  s = setup915();
  s.attenuation_db = 80;
  EXPECT_FALSE(rcv.configure(s).ok());
  s = setup915();
  s.center_hz = 7e9;
  EXPECT_FALSE(rcv.configure(s).ok());
  EXPECT_FALSE(rcv.post_center(1).ok());
  EXPECT_TRUE(inst.lines().empty());
}

TEST(ReceiverDriver, SweepPeakAndAsciiTrace) {
  Profile p = sim_profile("sim-receiver.jsonc");
  FakeInstrument inst;
  auto session = inst.session("analyzer", p);
  Receiver rcv(*session, p);
  ASSERT_TRUE(rcv.post_center(915e6).ok());
  ASSERT_TRUE(rcv.trigger().ok());
  ASSERT_TRUE(rcv.wait_sweep().ok());
  auto peak = rcv.read_peak_dbm();
  ASSERT_TRUE(peak.ok()) << peak.error().message;
  EXPECT_DOUBLE_EQ(peak.value(), -23.5);
  auto trace = rcv.read_trace_dbm();
  ASSERT_TRUE(trace.ok()) << trace.error().message;
  EXPECT_EQ(trace.value(), (std::vector<double>{-50.5, -49.25, -48}));
  EXPECT_EQ(inst.lines(), (Lines{"FREQ:CENT 915000000", "INIT:IMM", "*OPC?", "SYST:ERR?", "CALC:MARK1:MAX",
                                 "CALC:MARK1:Y?", "SYST:ERR?", "TRAC:DATA? TRACE1", "SYST:ERR?"}));
}

TEST(ReceiverDriver, Real32TraceInTheProfileByteOrder) {
  // IEEE 488.2 definite-length block "#<n><len><bytes>"; REAL,32 = IEEE 754 single,
  // FORMat:BORDer SWAPped = little-endian (SCPI-1999 FORMat subsystem).
  Profile p = sim_profile("sim-receiver.jsonc");
  p.trace_format = "real32";
  p.byte_order = "swapped";
  FakeInstrument inst;
  std::vector<double> values{-61.5, -60.25, -12.0};
  inst.raw_trace = scpi::encode_block(scpi::encode_real(values, 32, scpi::ByteOrder::swapped));
  auto session = inst.session("analyzer", p);
  Receiver rcv(*session, p);
  ASSERT_TRUE(rcv.initialize().ok());
  Lines init = inst.lines();
  EXPECT_NE(std::find(init.begin(), init.end(), "FORM:DATA REAL,32"), init.end());
  EXPECT_NE(std::find(init.begin(), init.end(), "FORM:BORD SWAP"), init.end());
  auto trace = rcv.read_trace_dbm();
  ASSERT_TRUE(trace.ok()) << trace.error().message;
  EXPECT_EQ(trace.value(), values);
}

TEST(ReceiverDriver, MaxHoldAndSweepTimeComeFromTheProfile) {
  Profile p = sim_profile("sim-receiver.jsonc");
  FakeInstrument inst;
  auto session = inst.session("analyzer", p);
  Receiver rcv(*session, p);
  ASSERT_TRUE(rcv.set_max_hold(true).ok());
  ASSERT_TRUE(rcv.set_max_hold(false).ok());
  ASSERT_TRUE(rcv.set_sweep_time(0.25).ok());
  ASSERT_TRUE(rcv.set_sweep_time_auto().ok());
  EXPECT_EQ(inst.lines(), (Lines{"TRAC1:MODE MAXH", "SYST:ERR?", "TRAC1:MODE WRIT", "SYST:ERR?", "SWE:TIME 0.25",
                                 "SYST:ERR?", "SWE:TIME:AUTO ON", "SYST:ERR?"}));
  // Another spelling is a profile edit, not code: the driver sends the profile's text verbatim.
  auto on = CommandTemplate::parse("receiver", "max_hold_on", "TRAC:MAXH ON");
  ASSERT_TRUE(on.ok());
  p.commands["max_hold_on"] = on.value();
  FakeInstrument inst2;
  auto session2 = inst2.session("analyzer", p);
  Receiver rcv2(*session2, p);
  ASSERT_TRUE(rcv2.set_max_hold(true).ok());
  EXPECT_EQ(inst2.lines().front(), "TRAC:MAXH ON");
  // Without the operations the driver refuses and sends nothing.
  p.commands.erase("max_hold_off");
  p.commands.erase("set_sweep_time");
  FakeInstrument inst3;
  auto session3 = inst3.session("analyzer", p);
  Receiver rcv3(*session3, p);
  Status off = rcv3.set_max_hold(false);
  ASSERT_FALSE(off.ok());
  EXPECT_NE(off.error().message.find("has no operation max_hold_off"), std::string::npos) << off.error().message;
  EXPECT_FALSE(rcv3.set_sweep_time(1).ok());
  EXPECT_TRUE(inst3.lines().empty());
}

TEST(ReceiverDriver, AbsentOperationsAreSkippedUnlessAskedForExplicitly) {
  // A receiver without VBW, reference level or attenuator (config/instruments/sim-basic-receiver.jsonc).
  Profile p = sim_profile("sim-basic-receiver.jsonc");
  ASSERT_TRUE(p.declares_absent("set_vbw"));
  FakeInstrument inst;
  auto session = inst.session("analyzer", p);
  Receiver rcv(*session, p);
  ReceiverSetup s = setup915();
  s.reference_level_dbm.reset();
  s.attenuation_db = -1;
  ASSERT_TRUE(rcv.configure(s).ok());   // VBW "same as RBW", no level, automatic attenuation
  EXPECT_EQ(inst.lines(), (Lines{"FREQ:CENT 915000000", "FREQ:SPAN 0", "BAND 10000", "SYST:ERR?"}));

  const std::vector<std::pair<std::string, ReceiverSetup>> asks = {
      {"set_vbw", [&] { ReceiverSetup x = s; x.vbw_hz = 30e3; return x; }()},
      {"set_reference_level", [&] { ReceiverSetup x = s; x.reference_level_dbm = 0; return x; }()},
      {"set_attenuation", [&] { ReceiverSetup x = s; x.attenuation_db = 10; return x; }()},
  };
  for (const auto& [op, setup] : asks) {
    FakeInstrument other;
    auto sess = other.session("analyzer", p);
    Receiver r(*sess, p);
    Status st = r.configure(setup);
    ASSERT_FALSE(st.ok()) << op;
    EXPECT_EQ(st.error().kind, ErrorKind::config);
    EXPECT_NE(st.error().message.find("analyzer: " + op + ": profile sim-basic-receiver declares this operation absent"),
              std::string::npos) << st.error().message;
    EXPECT_TRUE(other.lines().empty()) << op;
  }
}

TEST(SwitchDriver, SelectSendsThePositionTokenAndWaits) {
  Profile p = sim_profile("sim-switch.jsonc");
  FakeInstrument inst;
  auto session = inst.session("calswitch", p);
  Switch sw(*session, p);
  ASSERT_TRUE(sw.select("LOAD").ok());
  ASSERT_TRUE(sw.select("DUT").ok());
  EXPECT_EQ(inst.lines(), (Lines{"ROUT:CLOS (@3)", "*OPC?", "SYST:ERR?", "ROUT:CLOS (@4)", "*OPC?", "SYST:ERR?"}));
}

TEST(SwitchDriver, UnknownPositionNamesTheAllowedOnesAndSendsNothing) {
  Profile p = sim_profile("sim-switch.jsonc");
  FakeInstrument inst;
  auto session = inst.session("calswitch", p);
  Switch sw(*session, p);
  Status s = sw.select("THRU");
  ASSERT_FALSE(s.ok());
  EXPECT_EQ(s.error().kind, ErrorKind::invalid_argument);
  EXPECT_EQ(s.error().message,
            "calswitch: select: position \"THRU\" is not in profile sim-switch (allowed: DUT, DUT-OFFSET, LOAD, MISMATCH-A, MISMATCH-B, OPEN, SHORT); nothing sent");
  EXPECT_TRUE(inst.lines().empty());
}

TEST(IdentityCheck, MatchingAndMismatchedInstruments) {
  Profile p = sim_profile("sim-receiver.jsonc");
  FakeInstrument inst;
  inst.idn = "Echoline,SIM-SA,SA0001,1.0";
  auto session = inst.session("analyzer", p);
  auto id = identify_and_verify(*session, p);
  ASSERT_TRUE(id.ok()) << id.error().message;
  EXPECT_EQ(id.value().serial, "SA0001");

  inst.idn = "Echoline,SIM-SRC,SRC0001,1.0";   // addresses swapped: the generator answers
  Status s = verify_identity(*session, p);
  ASSERT_FALSE(s.ok());
  EXPECT_NE(s.error().message.find("expects manufacturer \"Echoline\" model \"SIM-SA\", instrument says \"Echoline,SIM-SRC,SRC0001,1.0\""),
            std::string::npos) << s.error().message;
}

}  // namespace
}  // namespace echoline::drivers
