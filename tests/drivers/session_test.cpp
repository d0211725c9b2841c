// ScpiSession: unit tests on the scripted memory transport (with injected faults), then over a
// real loopback TCP peer; and the loopback query round trip, printed (no timing assertion).
#include "drivers/scpi_session.hpp"

#include <algorithm>
#include <atomic>
#include <chrono>
#include <cmath>
#include <deque>
#include <mutex>
#include <string>
#include <vector>

#include <sys/stat.h>

#include <gtest/gtest.h>
#include <spdlog/spdlog.h>
#include <unistd.h>

#include <filesystem>
#include <fstream>
#include <sstream>
#include <stdexcept>

#include "drivers/fault_transport.hpp"
#include "drivers/logging.hpp"
#include "drivers/memory_transport.hpp"
#include "drivers/scpi_codec.hpp"
#include "tests/drivers/tcp_peer.hpp"

namespace echoline::drivers {
namespace {

using namespace std::chrono_literals;
using namespace std::string_literals;
using testing::TcpPeer;

bool contains(const std::string& haystack, const std::string& needle) {
  return haystack.find(needle) != std::string::npos;
}

// A session on a scripted in-memory peer.
struct MemoryBench {
  std::shared_ptr<MemoryPeer> peer = std::make_shared<MemoryPeer>();
  std::shared_ptr<FaultPlan> faults = std::make_shared<FaultPlan>();
  ScpiSession session;

  explicit MemoryBench(SessionOptions options = fast())
      : session("sig-gen",
                std::make_unique<FaultTransport>(std::make_unique<MemoryTransport>(peer, "memory://sig-gen", "sig-gen"),
                                                 faults),
                options) {
    EXPECT_TRUE(session.connect().ok());
  }
  static SessionOptions fast() {
    SessionOptions o;
    o.timeout = 20ms;
    o.opc_timeout = 50ms;
    return o;
  }
};

TEST(SessionMemory, QueryWritesTerminatedCommandAndStripsReplyTerminator) {
  MemoryBench b;
  b.peer->expect("FREQ?", "9.15E+08\r\n");
  auto reply = b.session.query("FREQ?");
  ASSERT_TRUE(reply.ok()) << reply.error().message;
  EXPECT_EQ(*reply, "9.15E+08");
  EXPECT_TRUE(b.peer->mismatches().empty());
}

TEST(SessionMemory, ConfigurableTerminators) {
  SessionOptions o = MemoryBench::fast();
  o.write_terminator = "\r\n";
  o.read_terminator = '\r';
  MemoryBench b(o);
  b.peer->expect("POW?\r", "-10\r");
  auto v = b.session.query_number("POW?");
  ASSERT_TRUE(v.ok()) << v.error().message;
  EXPECT_EQ(*v, -10.0);
}

TEST(SessionMemory, QueryNumberRejectsGarbageNamingInstrumentCommandAndReply) {
  MemoryBench b;
  b.peer->expect("FREQ?", "ERR\n");
  auto v = b.session.query_number("FREQ?");
  ASSERT_FALSE(v.ok());
  EXPECT_EQ(v.error().kind, ErrorKind::protocol);
  EXPECT_TRUE(contains(v.error().message, "sig-gen (memory://sig-gen): command \"FREQ?\": ")) << v.error().message;
  EXPECT_TRUE(contains(v.error().message, "\"ERR\"")) << v.error().message;
}

TEST(SessionMemory, QueryNumbersParsesList) {
  MemoryBench b;
  b.peer->expect("TRAC? TRACE1", "-40.5,-41,-9.9E37\n");
  auto v = b.session.query_numbers("TRAC? TRACE1");
  ASSERT_TRUE(v.ok());
  ASSERT_EQ(v->size(), 3u);
  EXPECT_EQ((*v)[2], -INFINITY);
}

TEST(SessionMemory, IdentifyNeedsFourFields) {
  MemoryBench b;
  b.peer->expect("*IDN?", "Echoline,SIM-SRC,SRC0001,1.0\n");
  auto id = b.session.identify();
  ASSERT_TRUE(id.ok());
  EXPECT_EQ(id->model, "SIM-SRC");
  b.peer->expect("*IDN?", "Echoline,SIM-SRC,SRC0001,1.0,extra\n");
  auto bad = b.session.identify();
  ASSERT_FALSE(bad.ok());
  EXPECT_EQ(bad.error().kind, ErrorKind::protocol);
  EXPECT_TRUE(contains(bad.error().message, "command \"*IDN?\"")) << bad.error().message;
  EXPECT_TRUE(contains(bad.error().message, "5 fields")) << bad.error().message;
}

TEST(SessionMemory, DefiniteBlock) {
  // IEEE 488.2 §8.7.9: #18ABCDEFGH carries 8 bytes; the response terminator follows.
  MemoryBench b;
  b.peer->expect("DATA?", "#18ABCDEFGH\n");
  auto payload = b.session.query_block("DATA?");
  ASSERT_TRUE(payload.ok()) << payload.error().message;
  EXPECT_EQ(*payload, "ABCDEFGH");
}

TEST(SessionMemory, BlockPayloadMayContainTerminatorBytes) {
  MemoryBench b;
  std::string payload = "\n\n#1\x00\xff"s + std::string(94, '\n');
  b.peer->expect("DATA?", "#3100" + payload + "\n");
  auto got = b.session.query_block("DATA?");
  ASSERT_TRUE(got.ok()) << got.error().message;
  EXPECT_EQ(*got, payload);
}

TEST(SessionMemory, IndefiniteBlock) {
  // IEEE 488.2 §8.7.10: #0, bytes, NL^END.
  MemoryBench b;
  b.peer->expect("DATA?", "#0XYZ\n");
  auto got = b.session.query_block("DATA?");
  ASSERT_TRUE(got.ok()) << got.error().message;
  EXPECT_EQ(*got, "XYZ");
}

TEST(SessionMemory, NonBlockReplyIsRejectedShowingTheReply) {
  MemoryBench b;
  b.peer->expect("DATA?", "-113,\"Undefined header\"\n");
  auto got = b.session.query_block("DATA?");
  ASSERT_FALSE(got.ok());
  EXPECT_EQ(got.error().kind, ErrorKind::protocol);
  EXPECT_TRUE(contains(got.error().message, "Undefined header")) << got.error().message;
  EXPECT_FALSE(b.session.is_open());   // the stream is out of step: closed
}

TEST(SessionMemory, NonDigitAfterHashIsRejected) {
  MemoryBench b;
  b.peer->expect("DATA?", "#A8ABCDEFGH\n");
  auto got = b.session.query_block("DATA?");
  ASSERT_FALSE(got.ok());
  EXPECT_EQ(got.error().kind, ErrorKind::protocol);
}

TEST(SessionMemory, BlockCutShortBeforeLengthIsSatisfiedTimesOut) {
  MemoryBench b;
  b.peer->expect("DATA?", "#18ABC");   // END before the 8 bytes
  auto got = b.session.query_block("DATA?");
  ASSERT_FALSE(got.ok());
  EXPECT_EQ(got.error().kind, ErrorKind::timeout);
  EXPECT_TRUE(contains(got.error().message, "command \"DATA?\"")) << got.error().message;
}

TEST(SessionMemory, BytesAfterBlockAreRejected) {
  MemoryBench b;
  b.peer->expect("DATA?", "#15ABCDEFG\n");
  auto got = b.session.query_block("DATA?");
  ASSERT_FALSE(got.ok());
  EXPECT_EQ(got.error().kind, ErrorKind::protocol);
  EXPECT_TRUE(contains(got.error().message, "\"FG\"")) << got.error().message;
}

TEST(SessionMemory, BlockOverLimitIsRejectedBeforeReading) {
  SessionOptions o = MemoryBench::fast();
  o.max_reply_bytes = 16;
  MemoryBench b(o);
  b.peer->expect("DATA?", "#217" + std::string(17, 'x') + "\n");
  auto got = b.session.query_block("DATA?");
  ASSERT_FALSE(got.ok());
  EXPECT_EQ(got.error().kind, ErrorKind::protocol);
}

TEST(SessionMemory, RealBlockBothOrders) {
  MemoryBench b;
  std::vector<double> trace{-42.5, -43.25, -60.0};
  b.peer->expect("TRAC? TRACE1", scpi::encode_block(scpi::encode_real(trace, 32, scpi::ByteOrder::normal)) + "\n");
  auto v = b.session.query_real_block("TRAC? TRACE1", 32, scpi::ByteOrder::normal);
  ASSERT_TRUE(v.ok()) << v.error().message;
  EXPECT_EQ(*v, trace);
  b.peer->expect("TRAC? TRACE1", scpi::encode_block(scpi::encode_real(trace, 64, scpi::ByteOrder::swapped)) + "\n");
  auto w = b.session.query_real_block("TRAC? TRACE1", 64, scpi::ByteOrder::swapped);
  ASSERT_TRUE(w.ok()) << w.error().message;
  EXPECT_EQ(*w, trace);
}

TEST(SessionMemory, WaitCompleteAcceptsOneOnly) {
  MemoryBench b;
  b.peer->expect("*OPC?", "1\n");
  EXPECT_TRUE(b.session.wait_complete().ok());
  b.peer->expect("*OPC?", "0\n");
  Status s = b.session.wait_complete();
  ASSERT_FALSE(s.ok());
  EXPECT_EQ(s.error().kind, ErrorKind::protocol);
}

TEST(SessionMemory, DrainErrorsReportsFirstErrorAndPrecedingCommand) {
  // SCPI-1999 Vol 2 §21.8: entries come out oldest first; 0,"No error" ends the queue.
  MemoryBench b;
  b.peer->expect("FREQ:CW 915E6", "");
  b.peer->expect("SYST:ERR?", "-113,\"Undefined header\"\n");
  b.peer->expect("SYST:ERR?", "-222,\"Data out of range\"\n");
  b.peer->expect("SYST:ERR?", "0,\"No error\"\n");
  ASSERT_TRUE(b.session.write("FREQ:CW 915E6").ok());
  Status s = b.session.drain_errors();
  ASSERT_FALSE(s.ok());
  EXPECT_EQ(s.error().kind, ErrorKind::instrument);
  EXPECT_EQ(s.error().instrument_code, -113);
  EXPECT_TRUE(contains(s.error().message, "sig-gen (memory://sig-gen)")) << s.error().message;
  EXPECT_TRUE(contains(s.error().message, "\"FREQ:CW 915E6\"")) << s.error().message;
  EXPECT_TRUE(contains(s.error().message, "-113, \"Undefined header\"")) << s.error().message;
  EXPECT_TRUE(contains(s.error().message, "1 more")) << s.error().message;
  EXPECT_TRUE(b.peer->script_done());
}

TEST(SessionMemory, DrainErrorsOnEmptyQueueIsOk) {
  MemoryBench b;
  b.peer->expect("SYST:ERR?", "+0,\"No error\"\n");
  EXPECT_TRUE(b.session.drain_errors().ok());
}

TEST(SessionMemory, DrainErrorsStopsAfterThirtyTwoReads) {
  MemoryBench b;
  b.peer->set_responder([](std::string_view) { return "-350,\"Queue overflow\"\n"s; });
  Status s = b.session.drain_errors();
  ASSERT_FALSE(s.ok());
  EXPECT_EQ(s.error().instrument_code, -350);
  EXPECT_EQ(b.peer->lines_written().size(), 32u);
}

TEST(SessionMemory, ClearAndResetSendCommonCommands) {
  MemoryBench b;
  b.peer->expect("*CLS", "");
  b.peer->expect("*RST", "");
  EXPECT_TRUE(b.session.clear().ok());
  EXPECT_TRUE(b.session.reset().ok());
  EXPECT_TRUE(b.peer->mismatches().empty());
}

TEST(SessionFaults, ReplyCutShortTimesOutAndClosesLink) {
  MemoryBench b;
  b.peer->expect("TRAC?", "-40.1,-40.2,-40.3\n");
  b.faults->cut_after_bytes = 6;
  auto v = b.session.query_numbers("TRAC?");
  ASSERT_FALSE(v.ok());
  EXPECT_EQ(v.error().kind, ErrorKind::timeout);
  EXPECT_TRUE(contains(v.error().message, "command \"TRAC?\"")) << v.error().message;
  EXPECT_FALSE(b.session.is_open());
}

TEST(SessionFaults, StallPastDeadlineThenReconnectGetsFreshAnswer) {
  MemoryBench b;
  b.peer->expect("*OPC?", "1\n");
  b.faults->stall_next_read = true;
  Status s = b.session.wait_complete();
  ASSERT_FALSE(s.ok());
  EXPECT_EQ(s.error().kind, ErrorKind::timeout);
  EXPECT_EQ(b.peer->pending_input(), 0u);   // the late "1" went with the closed link
  ASSERT_TRUE(b.session.reconnect().ok());
  b.peer->expect("FREQ?", "1E9\n");
  auto f = b.session.query_number("FREQ?");
  ASSERT_TRUE(f.ok());
  EXPECT_EQ(*f, 1e9);
}

TEST(SessionFaults, DroppedLinkIsClosedError) {
  MemoryBench b;
  b.faults->drop_before_next = true;
  Status s = b.session.write("OUTP ON");
  ASSERT_FALSE(s.ok());
  EXPECT_EQ(s.error().kind, ErrorKind::closed);
  EXPECT_TRUE(contains(s.error().message, "command \"OUTP ON\"")) << s.error().message;
  Status again = b.session.write("OUTP ON");
  EXPECT_EQ(again.error().kind, ErrorKind::closed);
}

TEST(SessionFaults, SplitWritesStillFormOneLine) {
  MemoryBench b;
  b.faults->split_writes_into = 2;
  b.peer->expect("SENS:FREQ:CENT 9.15E+08", "");
  ASSERT_TRUE(b.session.write("SENS:FREQ:CENT 9.15E+08").ok());
  EXPECT_TRUE(b.peer->mismatches().empty());
  EXPECT_EQ(b.peer->lines_written().size(), 1u);
}

TEST(SessionLogging, ExchangesAreLoggedAtTraceWithRoundTrip) {
  auto previous = spdlog::default_logger();
  auto dir = std::filesystem::temp_directory_path() / ("echoline-log-" + std::to_string(::getpid()));
  std::filesystem::remove_all(dir);
  LogOptions o;
  o.program = "session-test";
  o.file = dir / "sub" / "station.log";
  o.level = "trace";
  o.console = false;
  setup_logging(o);
  {
    MemoryBench b;
    b.peer->expect("FREQ?", "9.15E+08\n");
    ASSERT_TRUE(b.session.query("FREQ?").ok());
  }
  spdlog::default_logger()->flush();
  std::ifstream in(dir / "sub" / "station.log");
  std::stringstream text;
  text << in.rdbuf();
  spdlog::set_default_logger(previous);
  EXPECT_TRUE(contains(text.str(), "sig-gen (memory://sig-gen): > FREQ? < \"9.15E+08\" [")) << text.str();
  EXPECT_TRUE(contains(text.str(), " us]")) << text.str();
  std::filesystem::remove_all(dir);
  o.file.clear();
  o.level = "loud";
  EXPECT_THROW(setup_logging(o), std::invalid_argument);
  spdlog::set_default_logger(previous);
}

TEST(SessionLogging, JournalPrioritiesAndStreamCheck) {
  // sd-daemon(3): SD_CRIT <2>, SD_ERR <3>, SD_WARNING <4>, SD_INFO <6>, SD_DEBUG <7>.
  EXPECT_EQ(journal_prefix("critical"), "<2>");
  EXPECT_EQ(journal_prefix("error"), "<3>");
  EXPECT_EQ(journal_prefix("warning"), "<4>");
  EXPECT_EQ(journal_prefix("info"), "<6>");
  EXPECT_EQ(journal_prefix("debug"), "<7>");
  EXPECT_EQ(journal_prefix("trace"), "<7>");
  // systemd.exec(5): JOURNAL_STREAM is "<device>:<inode>" of the journal stream.
  struct stat st{};
  ASSERT_EQ(::fstat(2, &st), 0);
  const std::string mine = std::to_string(st.st_dev) + ":" + std::to_string(st.st_ino);
  EXPECT_TRUE(stderr_is_journal(mine.c_str()));
  EXPECT_FALSE(stderr_is_journal(nullptr));
  EXPECT_FALSE(stderr_is_journal(""));
  EXPECT_FALSE(stderr_is_journal("8:x"));
  EXPECT_FALSE(stderr_is_journal((std::to_string(st.st_dev) + ":" + std::to_string(st.st_ino + 1)).c_str()));
}

// --- over real loopback TCP ---

// A small SCPI instrument: *IDN?, *OPC?, FREQ <f>/FREQ?, a trace block, and an error queue that
// collects -113 for unknown headers (SCPI-1999 Vol 2 §21.8.4).
class MiniInstrument {
 public:
  bool handle(int fd, const std::string& line) {
    std::lock_guard lock(mutex_);
    if (line == "*IDN?") return reply(fd, "Echoline,SIM-SA,SA0815,2.1.0");
    if (line == "*OPC?") return reply(fd, "1");
    if (line == "*CLS") { errors_.clear(); return true; }
    if (line.starts_with("FREQ ")) { frequency_ = line.substr(5); return true; }
    if (line == "FREQ?") return reply(fd, frequency_);
    if (line == "TRAC? TRACE1") {
      std::vector<double> trace{-12.5, -18.0, -25.75, -18.0, -12.5};
      return reply(fd, scpi::encode_block(scpi::encode_real(trace, 32, scpi::ByteOrder::normal)));
    }
    if (line == "SYST:ERR?") {
      if (errors_.empty()) return reply(fd, "0,\"No error\"");
      std::string e = errors_.front();
      errors_.pop_front();
      return reply(fd, e);
    }
    errors_.push_back("-113,\"Undefined header\"");
    return true;
  }

 private:
  static bool reply(int fd, const std::string& text) { return TcpPeer::send_all(fd, text + "\n"); }
  std::mutex mutex_;
  std::deque<std::string> errors_;
  std::string frequency_ = "1E9";
};

struct TcpBench {
  MiniInstrument instrument;
  TcpPeer peer{[this](int fd, const std::string& line) { return instrument.handle(fd, line); }};
  ScpiSession session;
  TcpBench() : session("spec-an", make(peer.address())) { EXPECT_TRUE(session.connect().ok()); }
  static std::unique_ptr<Transport> make(const std::string& address) {
    auto t = make_transport(address, "spec-an");
    EXPECT_TRUE(t.ok());
    return std::move(*t);
  }
};

TEST(SessionTcp, QueryAndWriteRoundTrip) {
  TcpBench b;
  ASSERT_TRUE(b.session.write("FREQ 9.15E+08").ok());
  auto f = b.session.query_number("FREQ?");
  ASSERT_TRUE(f.ok()) << f.error().message;
  EXPECT_EQ(*f, 915e6);
  auto id = b.session.identify();
  ASSERT_TRUE(id.ok());
  EXPECT_EQ(id->serial, "SA0815");
}

TEST(SessionTcp, WaitComplete) {
  TcpBench b;
  EXPECT_TRUE(b.session.wait_complete().ok());
}

TEST(SessionTcp, DrainErrorsGetsTheInstrumentsErrorString) {
  TcpBench b;
  ASSERT_TRUE(b.session.write("FREQ:BOGUS 1").ok());
  Status s = b.session.drain_errors();
  ASSERT_FALSE(s.ok());
  EXPECT_EQ(s.error().kind, ErrorKind::instrument);
  EXPECT_EQ(s.error().instrument_code, -113);
  EXPECT_TRUE(contains(s.error().message, "spec-an (" + b.peer.address() + ")")) << s.error().message;
  EXPECT_TRUE(contains(s.error().message, "\"FREQ:BOGUS 1\"")) << s.error().message;
  EXPECT_TRUE(contains(s.error().message, "Undefined header")) << s.error().message;
  EXPECT_TRUE(b.session.drain_errors().ok());   // the queue is empty now
}

TEST(SessionTcp, RealBlockRead) {
  TcpBench b;
  auto v = b.session.query_real_block("TRAC? TRACE1", 32, scpi::ByteOrder::normal);
  ASSERT_TRUE(v.ok()) << v.error().message;
  EXPECT_EQ(*v, (std::vector<double>{-12.5, -18.0, -25.75, -18.0, -12.5}));
  auto f = b.session.query("*OPC?");   // the stream is still in step after the block
  ASSERT_TRUE(f.ok());
  EXPECT_EQ(*f, "1");
}

TEST(SessionTcpBenchmark, LoopbackQueryRoundTripMedianPrinted) {
  // Prints the median round trip of one-line queries through ScpiSession + TCP on loopback.
  // A measurement, not an assertion (timing is not tested).
  TcpPeer peer([](int fd, const std::string& line) { return TcpPeer::send_all(fd, line + "\n"); });
  auto t = make_transport(peer.address(), "echo");
  ASSERT_TRUE(t.ok());
  ScpiSession session("echo", std::move(*t));
  ASSERT_TRUE(session.connect().ok());
  constexpr int kQueries = 10000;
  std::vector<double> us;
  us.reserve(kQueries);
  for (int i = 0; i < kQueries; ++i) {
    auto start = std::chrono::steady_clock::now();
    auto r = session.query("FREQ?");
    auto end = std::chrono::steady_clock::now();
    ASSERT_TRUE(r.ok()) << r.error().message;
    us.push_back(std::chrono::duration<double, std::micro>(end - start).count());
  }
  std::sort(us.begin(), us.end());
  std::printf("[ MEASURED ] loopback ScpiSession::query round trip over %d queries: median %.1f us, p10 %.1f us, "
              "p90 %.1f us, p99 %.1f us\n",
              kQueries, us[us.size() / 2], us[us.size() / 10], us[us.size() * 9 / 10], us[us.size() * 99 / 100]);
}

}  // namespace
}  // namespace echoline::drivers
