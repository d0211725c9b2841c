// Serial transport against real pseudo-terminal pairs: the termios path, and the real
// libserialport code path through the link-time seam (tests/support/pty_seam/pty_seam.c).
#include "drivers/serial_transport.hpp"

#include <fcntl.h>
#include <termios.h>
#include <unistd.h>

#include <chrono>
#include <string>
#include <thread>

#include <gtest/gtest.h>

#include "drivers/transport.hpp"
#include "tests/support/pty_pair.hpp"

// Recorded by tests/support/pty_seam/pty_seam.c: the flags libserialport last set on a pty slave.
extern "C" unsigned pty_seam_last_cflag(void);
extern "C" unsigned pty_seam_last_iflag(void);
extern "C" int pty_seam_settings_seen(void);

namespace echoline::drivers {
namespace {

using namespace std::chrono_literals;
using testing::PtyPair;

// The termios settings belong to the tty, not to one fd: read them through the fd the pair holds
// (a second open() would be refused by TIOCEXCL).
termios settings_of(const PtyPair& pty) {
  termios t{};
  ::tcgetattr(pty.slave_fd(), &t);
  return t;
}

std::unique_ptr<Transport> open_serial(const std::string& address) {
  auto t = make_transport(address, "bench-switch");
  EXPECT_TRUE(t.ok()) << (t ? "" : t.error().message);
  if (!t) return nullptr;
  Status s = (*t)->open(1000ms);
  EXPECT_TRUE(s.ok()) << (s ? "" : s.error().message);
  return std::move(*t);
}

// One exchange each way: the transport writes a command, the "instrument" on the master answers.
void exchange_both_ways(Transport& t, PtyPair& pty) {
  ASSERT_TRUE(t.write("ROUT:CLOS (@3)\n", 1000ms).ok());
  EXPECT_EQ(pty.read_until('\n', 1000ms), "ROUT:CLOS (@3)\n");
  ASSERT_TRUE(pty.write("1\n"));
  auto reply = t.read_until('\n', 1000ms, 64);
  ASSERT_TRUE(reply.ok()) << reply.error().message;
  EXPECT_EQ(*reply, "1");
}

TEST(SerialAddress, ParsesAllSettings) {
  auto s = parse_serial_address("serial:/dev/ttyUSB0?baud=115200&data=7&parity=even&stop=2&flow=rtscts");
  ASSERT_TRUE(s.ok()) << s.error().message;
  EXPECT_EQ(s->device, "/dev/ttyUSB0");
  EXPECT_EQ(s->baud, 115200);
  EXPECT_EQ(s->data_bits, 7);
  EXPECT_EQ(s->parity, SerialParity::even);
  EXPECT_EQ(s->stop_bits, 2);
  EXPECT_EQ(s->flow, SerialFlow::rtscts);
  auto d = parse_serial_address("serial:/dev/ttyS0");
  ASSERT_TRUE(d.ok());
  EXPECT_EQ(d->baud, 9600);   // defaults: 9600 8N1, no flow control
  EXPECT_EQ(d->data_bits, 8);
  EXPECT_EQ(d->parity, SerialParity::none);
  EXPECT_EQ(d->stop_bits, 1);
  EXPECT_EQ(d->flow, SerialFlow::none);
}

TEST(SerialAddress, BadSettingsAreConfigErrorsNamingAddressAndKey) {
  struct Case { const char* address; const char* mentions; };
  for (Case c : {Case{"serial:", "no device"}, Case{"serial:ttyUSB0", "absolute"},
                 Case{"serial:/dev/ttyS0?baud=fast", "baud"}, Case{"serial:/dev/ttyS0?data=9", "data"},
                 Case{"serial:/dev/ttyS0?parity=mark", "parity"}, Case{"serial:/dev/ttyS0?stop=3", "stop"},
                 Case{"serial:/dev/ttyS0?flow=dsrdtr", "flow"}, Case{"serial:/dev/ttyS0?speed=9600", "speed"},
                 Case{"serial:/dev/ttyS0?baud", "key=value"}}) {
    auto t = make_transport(c.address, "bench-switch");
    ASSERT_FALSE(t.ok()) << c.address;
    EXPECT_EQ(t.error().kind, ErrorKind::config);
    EXPECT_NE(t.error().message.find(c.address), std::string::npos) << t.error().message;
    EXPECT_NE(t.error().message.find(c.mentions), std::string::npos) << t.error().message;
  }
}

TEST(SerialPty, PseudoTerminalIsDetectedThroughSymlinks) {
  PtyPair pty;
  EXPECT_TRUE(is_pseudo_terminal(pty.slave_path()));
  std::string link = "/tmp/echoline-pty-link-" + std::to_string(::getpid());
  ::unlink(link.c_str());
  ASSERT_EQ(::symlink(pty.slave_path().c_str(), link.c_str()), 0);
  EXPECT_TRUE(is_pseudo_terminal(link));
  ::unlink(link.c_str());
  EXPECT_FALSE(is_pseudo_terminal("/dev/null"));
  EXPECT_FALSE(is_pseudo_terminal("/dev/does-not-exist"));
}

TEST(SerialTermios, OpensPtyAndExchangesLines) {
  PtyPair pty;
  auto t = open_serial("serial:" + pty.slave_path() + "?baud=115200");   // driver=auto picks termios
  ASSERT_TRUE(t);
  exchange_both_ways(*t, pty);
}

TEST(SerialTermios, AppliesFraming) {
  PtyPair pty;
  auto t = open_serial("serial:" + pty.slave_path() + "?driver=termios&baud=19200&data=7&parity=odd&stop=2");
  ASSERT_TRUE(t);
  // A pty stores speed and stop bits but forces CS8 and no parity (Linux drivers/tty/pty.c,
  // pty_set_termios; from memory), so only what it keeps can be read back here.
  // What was asked for is recorded by the seam (tests/support/pty_seam/pty_seam.c).
  EXPECT_EQ(pty_seam_last_cflag() & CSIZE, static_cast<tcflag_t>(CS7));
  EXPECT_TRUE(pty_seam_last_cflag() & PARENB);
  EXPECT_TRUE(pty_seam_last_cflag() & PARODD);
  EXPECT_TRUE(pty_seam_last_cflag() & CSTOPB);
  EXPECT_FALSE(pty_seam_last_iflag() & (IXON | IXOFF));
  termios s = settings_of(pty);
  EXPECT_TRUE(s.c_cflag & CSTOPB);
  EXPECT_EQ(::cfgetospeed(&s), static_cast<speed_t>(B19200));
}

TEST(SerialTermios, TimeoutFiresWithSilentPeerAndClosesPort) {
  PtyPair pty;
  auto t = open_serial("serial:" + pty.slave_path());
  ASSERT_TRUE(t);
  ASSERT_TRUE(t->write("*OPC?\n", 1000ms).ok());
  EXPECT_EQ(pty.read_until('\n', 1000ms), "*OPC?\n");   // the instrument hears it and stays silent
  auto reply = t->read_until('\n', 100ms, 64);
  ASSERT_FALSE(reply.ok());
  EXPECT_EQ(reply.error().kind, ErrorKind::timeout);
  EXPECT_NE(reply.error().message.find("bench-switch (serial:" + pty.slave_path()), std::string::npos)
      << reply.error().message;
  EXPECT_NE(reply.error().message.find("(nothing arrived)"), std::string::npos) << reply.error().message;
  EXPECT_FALSE(t->is_open());
  EXPECT_EQ(t->read_until('\n', 100ms, 64).error().kind, ErrorKind::closed);
  ASSERT_TRUE(t->reconnect(1000ms).ok());
  exchange_both_ways(*t, pty);
}

TEST(SerialTermios, ReplySplitOverManyWritesReassembles) {
  PtyPair pty;
  auto t = open_serial("serial:" + pty.slave_path() + "?driver=termios");
  ASSERT_TRUE(t);
  const std::string reply = "Echoline,SIM-SW,SW0099,0.9.1\n";
  std::thread instrument([&] {
    for (char c : reply) {
      pty.write(std::string(1, c));
      std::this_thread::sleep_for(1ms);
    }
  });
  auto line = t->read_until('\n', 3000ms, 256);
  instrument.join();
  ASSERT_TRUE(line.ok()) << line.error().message;
  EXPECT_EQ(*line + "\n", reply);
}

TEST(SerialTermios, TimeoutCountsAndQuotesTheBytesThatArrived) {
  PtyPair pty;
  auto t = open_serial("serial:" + pty.slave_path() + "?driver=termios");
  ASSERT_TRUE(t);
  ASSERT_TRUE(pty.write("+1.25E"));   // the start of a reply, no terminator
  auto reply = t->read_until('\n', 200ms, 256);
  ASSERT_FALSE(reply.ok());
  EXPECT_EQ(reply.error().kind, ErrorKind::timeout);
  EXPECT_NE(reply.error().message.find("(6 bytes arrived: \"+1.25E\")"), std::string::npos) << reply.error().message;
}

TEST(SerialTermios, PeerHangUpIsClosedError) {
  PtyPair pty;
  auto t = open_serial("serial:" + pty.slave_path());
  ASSERT_TRUE(t);
  pty.close_master();
  auto reply = t->read_until('\n', 1000ms, 64);
  ASSERT_FALSE(reply.ok());
  EXPECT_EQ(reply.error().kind, ErrorKind::closed) << reply.error().message;
}

TEST(SerialTermios, OpenTakesExclusiveAccess) {
  if (::geteuid() == 0) GTEST_SKIP() << "root may open a tty despite TIOCEXCL";
  PtyPair pty;
  auto t = open_serial("serial:" + pty.slave_path());
  ASSERT_TRUE(t);
  int fd = ::open(pty.slave_path().c_str(), O_RDWR | O_NOCTTY | O_NONBLOCK);
  EXPECT_LT(fd, 0);
  if (fd >= 0) ::close(fd);
}

// --- the real libserialport code path (through the seam) ---

struct LibspCase {
  const char* options;
  tcflag_t csize;
  bool parity, odd, two_stop, rtscts, xonxoff;
  speed_t speed;
};

class SerialLibserialport : public ::testing::TestWithParam<LibspCase> {};

TEST_P(SerialLibserialport, OpensConfiguresAndExchanges) {
  const LibspCase& c = GetParam();
  PtyPair pty;
  int seen_before = pty_seam_settings_seen();
  auto t = open_serial("serial:" + pty.slave_path() + "?driver=libserialport&" + c.options);
  ASSERT_TRUE(t);
  ASSERT_TRUE(t->is_open());
  exchange_both_ways(*t, pty);
  // What libserialport asked the kernel for (recorded by the seam; the pty keeps only part of it).
  ASSERT_GT(pty_seam_settings_seen(), seen_before);
  tcflag_t cflag = pty_seam_last_cflag();
  tcflag_t iflag = pty_seam_last_iflag();
  EXPECT_EQ(cflag & CSIZE, c.csize);
  EXPECT_EQ((cflag & PARENB) != 0, c.parity);
  EXPECT_EQ((cflag & PARODD) != 0, c.odd);
  EXPECT_EQ((cflag & CSTOPB) != 0, c.two_stop);
  EXPECT_EQ((cflag & CRTSCTS) != 0, c.rtscts);
  EXPECT_EQ((iflag & IXON) != 0, c.xonxoff);
  EXPECT_EQ((iflag & IXOFF) != 0, c.xonxoff);
  termios s = settings_of(pty);   // the speed the pty stored
  EXPECT_EQ(::cfgetospeed(&s), c.speed);
}

INSTANTIATE_TEST_SUITE_P(
    Settings, SerialLibserialport,
    ::testing::Values(LibspCase{"baud=9600&data=8&parity=none&stop=1", CS8, false, false, false, false, false, B9600},
                      LibspCase{"baud=115200&data=7&parity=even&stop=2&flow=rtscts", CS7, true, false, true, true,
                                false, B115200},
                      LibspCase{"baud=38400&flow=xonxoff", CS8, false, false, false, false, true, B38400}));

TEST(SerialLibserialportPath, TimeoutFiresWithSilentPeer) {
  PtyPair pty;
  auto t = open_serial("serial:" + pty.slave_path() + "?driver=libserialport");
  ASSERT_TRUE(t);
  auto reply = t->read_until('\n', 100ms, 64);
  ASSERT_FALSE(reply.ok());
  EXPECT_EQ(reply.error().kind, ErrorKind::timeout);
  EXPECT_FALSE(t->is_open());
}

TEST(SerialLibserialportPath, ReplySplitOverManyWritesReassembles) {
  PtyPair pty;
  auto t = open_serial("serial:" + pty.slave_path() + "?driver=libserialport&baud=115200");
  ASSERT_TRUE(t);
  std::string block = "#210" + std::string("\x3F\xC0\x00\x00\x00\x00\x00\x00\x01\x02", 10) + "\n";
  std::thread instrument([&] {
    for (std::size_t off = 0; off < block.size(); off += 2) {
      pty.write(block.substr(off, 2));
      std::this_thread::sleep_for(2ms);
    }
  });
  auto head = t->read_exact(4, 3000ms);
  auto payload = t->read_exact(10, 3000ms);
  auto end = t->read_until('\n', 3000ms, 8);
  instrument.join();
  ASSERT_TRUE(head.ok() && payload.ok() && end.ok());
  EXPECT_EQ(*head, "#210");
  EXPECT_EQ(*payload, block.substr(4, 10));
  EXPECT_EQ(*end, "");
}

TEST(SerialLibserialportPath, MissingDeviceNamesDeviceAndAddress) {
  auto t = make_transport("serial:/dev/ttyECHOLINE-NONE?driver=libserialport", "bench-switch");
  ASSERT_TRUE(t.ok());
  Status s = (*t)->open(100ms);
  ASSERT_FALSE(s.ok());
  EXPECT_EQ(s.error().kind, ErrorKind::io);
  EXPECT_NE(s.error().message.find("bench-switch (serial:/dev/ttyECHOLINE-NONE?driver=libserialport): opening "
                                   "/dev/ttyECHOLINE-NONE (libserialport)"),
            std::string::npos)
      << s.error().message;
}

}  // namespace
}  // namespace echoline::drivers
