// TCP transport over real loopback sockets against an in-test peer.
#include "drivers/tcp_transport.hpp"

#include <arpa/inet.h>
#include <fcntl.h>
#include <netinet/in.h>
#include <sys/socket.h>
#include <unistd.h>

#include <atomic>
#include <chrono>
#include <string>
#include <thread>
#include <vector>

#include <gtest/gtest.h>

#include "drivers/scpi_codec.hpp"
#include "drivers/transport.hpp"
#include "tests/drivers/tcp_peer.hpp"

namespace echoline::drivers {
namespace {

using namespace std::chrono_literals;
using testing::TcpPeer;

std::unique_ptr<Transport> connect_to(const TcpPeer& peer, Millis timeout = 2000ms) {
  auto t = make_transport(peer.address(), "test-receiver");
  EXPECT_TRUE(t.ok());
  Status s = (*t)->open(timeout);
  EXPECT_TRUE(s.ok()) << (s ? "" : s.error().message);
  return std::move(*t);
}

bool echo(int fd, const std::string& line) { return TcpPeer::send_all(fd, line + "\n"); }

TEST(TcpAddress, BadAddressesAreConfigErrorsNamingThem) {
  for (const char* bad : {"tcp://host", "tcp://:5025", "tcp://h:99999", "tcp://h:0", "tcp://h:50x", "udp://h:1",
                          "tcp://[::1:5025"}) {
    auto t = make_transport(bad, "sig-gen");
    ASSERT_FALSE(t.ok()) << bad;
    EXPECT_EQ(t.error().kind, ErrorKind::config);
    EXPECT_NE(t.error().message.find(bad), std::string::npos) << t.error().message;
    EXPECT_NE(t.error().message.find("sig-gen"), std::string::npos) << t.error().message;
  }
  auto v6 = parse_tcp_address("tcp://[::1]:5025");
  ASSERT_TRUE(v6.ok());
  EXPECT_EQ(v6->host, "::1");
  EXPECT_EQ(v6->port, 5025);
}

TEST(TcpTransport, WritesOneLineAndReadsTheReply) {
  TcpPeer peer(echo);
  auto t = connect_to(peer);
  ASSERT_TRUE(t->write("FREQ 915E6\n", 1000ms).ok());
  auto reply = t->read_until('\n', 1000ms, 1024);
  ASSERT_TRUE(reply.ok()) << reply.error().message;
  EXPECT_EQ(*reply, "FREQ 915E6");
  EXPECT_EQ(t->address(), peer.address());
}

TEST(TcpTransport, ConnectionRefusedNamesInstrumentAndAddress) {
  std::string address;
  {
    TcpPeer gone(echo);
    address = gone.address();
  }
  auto t = make_transport(address, "spec-an");
  ASSERT_TRUE(t.ok());
  Status s = (*t)->open(1000ms);
  ASSERT_FALSE(s.ok());
  EXPECT_EQ(s.error().kind, ErrorKind::closed);
  EXPECT_NE(s.error().message.find("spec-an (" + address + "): connecting: "), std::string::npos) << s.error().message;
  EXPECT_NE(s.error().message.find("refused"), std::string::npos) << s.error().message;
}

TEST(TcpTransport, ReadTimesOutWithSilentPeerAndClosesTheLink) {
  TcpPeer peer([](int, const std::string&) { return true; });   // never answers
  auto t = connect_to(peer);
  ASSERT_TRUE(t->write("*OPC?\n", 1000ms).ok());
  auto reply = t->read_until('\n', 100ms, 1024);
  ASSERT_FALSE(reply.ok());
  EXPECT_EQ(reply.error().kind, ErrorKind::timeout);
  EXPECT_NE(reply.error().message.find(peer.address()), std::string::npos);
  // Nothing was sent: no byte count made of buffer space reserved for the read.
  EXPECT_NE(reply.error().message.find("(nothing arrived)"), std::string::npos) << reply.error().message;
  EXPECT_EQ(reply.error().message.find("bytes"), std::string::npos) << reply.error().message;
  EXPECT_FALSE(t->is_open());
  auto next = t->read_until('\n', 100ms, 1024);
  ASSERT_FALSE(next.ok());
  EXPECT_EQ(next.error().kind, ErrorKind::closed);
}

TEST(TcpTransport, TimeoutCountsAndQuotesTheBytesThatArrived) {
  // The peer sends the start of a reply and stops before the terminator.
  TcpPeer peer([](int fd, const std::string&) { return TcpPeer::send_all(fd, "+1.25E\r"); });
  auto t = connect_to(peer);
  ASSERT_TRUE(t->write("MEAS?\n", 1000ms).ok());
  auto reply = t->read_until('\n', 200ms, 1024);
  ASSERT_FALSE(reply.ok());
  EXPECT_EQ(reply.error().kind, ErrorKind::timeout);
  EXPECT_NE(reply.error().message.find("(7 bytes arrived: \"+1.25E\\x0D\")"), std::string::npos)
      << reply.error().message;

  // read_exact: the count is of bytes received, not of bytes asked for.
  TcpPeer block([](int fd, const std::string&) { return TcpPeer::send_all(fd, "#3"); });
  auto b = connect_to(block);
  ASSERT_TRUE(b->write("DATA?\n", 1000ms).ok());
  auto data = b->read_exact(512, 200ms);
  ASSERT_FALSE(data.ok());
  EXPECT_EQ(data.error().kind, ErrorKind::timeout);
  EXPECT_NE(data.error().message.find("only 2 of them arrived"), std::string::npos) << data.error().message;
}

TEST(TcpTransport, LateReplyIsNotTakenAsTheNextAnswer) {
  TcpPeer peer([](int fd, const std::string& line) {
    if (line == "SLOW?") std::this_thread::sleep_for(300ms);
    return TcpPeer::send_all(fd, "answer to " + line + "\n");
  });
  auto t = connect_to(peer);
  ASSERT_TRUE(t->write("SLOW?\n", 1000ms).ok());
  auto late = t->read_until('\n', 50ms, 1024);
  ASSERT_FALSE(late.ok());
  EXPECT_EQ(late.error().kind, ErrorKind::timeout);
  ASSERT_TRUE(t->reconnect(2000ms).ok());
  ASSERT_TRUE(t->write("FAST?\n", 1000ms).ok());
  auto reply = t->read_until('\n', 2000ms, 1024);
  ASSERT_TRUE(reply.ok()) << reply.error().message;
  EXPECT_EQ(*reply, "answer to FAST?");
}

TEST(TcpTransport, PeerDropMidReplyIsClosedErrorAndReconnectWorks) {
  std::atomic<int> calls{0};
  TcpPeer peer([&](int fd, const std::string& line) {
    if (calls++ == 0) {
      TcpPeer::send_all(fd, "-45.2,-46");   // half a reply, then the link goes
      return false;
    }
    return echo(fd, line);
  });
  auto t = connect_to(peer);
  ASSERT_TRUE(t->write("TRAC?\n", 1000ms).ok());
  auto reply = t->read_until('\n', 2000ms, 1024);
  ASSERT_FALSE(reply.ok());
  EXPECT_EQ(reply.error().kind, ErrorKind::closed);
  EXPECT_NE(reply.error().message.find("test-receiver (" + peer.address() + "): reading reply: connection closed"),
            std::string::npos)
      << reply.error().message;
  EXPECT_NE(reply.error().message.find("9 bytes"), std::string::npos) << reply.error().message;
  EXPECT_FALSE(t->is_open());

  ASSERT_TRUE(t->reconnect(2000ms).ok());
  ASSERT_TRUE(t->write("AGAIN\n", 1000ms).ok());
  auto again = t->read_until('\n', 2000ms, 1024);
  ASSERT_TRUE(again.ok()) << again.error().message;
  EXPECT_EQ(*again, "AGAIN");
  EXPECT_EQ(peer.connections(), 2);
}

TEST(TcpTransport, PartialReadsReassemble) {
  TcpPeer peer([](int fd, const std::string&) {
    const std::string reply = "Echoline,SIM-SA,SA0007,2.0\n";
    for (char c : reply) {
      TcpPeer::send_all(fd, std::string(1, c));
      std::this_thread::sleep_for(1ms);
    }
    return true;
  });
  auto t = connect_to(peer);
  ASSERT_TRUE(t->write("*IDN?\n", 1000ms).ok());
  auto reply = t->read_until('\n', 2000ms, 1024);
  ASSERT_TRUE(reply.ok()) << reply.error().message;
  EXPECT_EQ(*reply, "Echoline,SIM-SA,SA0007,2.0");
}

TEST(TcpTransport, ReplySplitOverManyPacketsParsesAndReadExactSpansPackets) {
  std::vector<double> trace;
  for (int i = 0; i < 2001; ++i) trace.push_back(-80.0 + 0.01 * i);
  std::string list;
  for (double v : trace) list += (list.empty() ? "" : ",") + scpi::format_number(v);
  TcpPeer peer([&](int fd, const std::string& line) {
    std::string reply = line == "LIST?" ? list + "\n" : "#15ABCDE" "\n";
    for (std::size_t off = 0; off < reply.size(); off += 3) {
      TcpPeer::send_all(fd, reply.substr(off, 3));
      if (off % 300 == 0) std::this_thread::sleep_for(1ms);
    }
    return true;
  });
  auto t = connect_to(peer);
  ASSERT_TRUE(t->write("LIST?\n", 1000ms).ok());
  auto reply = t->read_until('\n', 5000ms, 1 << 20);
  ASSERT_TRUE(reply.ok()) << reply.error().message;
  auto values = scpi::parse_number_list(*reply);
  ASSERT_TRUE(values.ok()) << values.error().message;
  EXPECT_EQ(*values, trace);

  ASSERT_TRUE(t->write("BLOCK?\n", 1000ms).ok());
  auto head = t->read_exact(3, 2000ms);
  ASSERT_TRUE(head.ok());
  EXPECT_EQ(*head, "#15");
  auto body = t->read_exact(5, 2000ms);
  ASSERT_TRUE(body.ok());
  EXPECT_EQ(*body, "ABCDE");
  auto end = t->read_until('\n', 2000ms, 16);
  ASSERT_TRUE(end.ok());
  EXPECT_EQ(*end, "");
}

TEST(TcpTransport, OverlongReplyWithoutTerminatorIsProtocolError) {
  TcpPeer peer([](int fd, const std::string&) { return TcpPeer::send_all(fd, std::string(5000, 'x')); });
  auto t = connect_to(peer);
  ASSERT_TRUE(t->write("X?\n", 1000ms).ok());
  auto reply = t->read_until('\n', 2000ms, 1000);
  ASSERT_FALSE(reply.ok());
  EXPECT_EQ(reply.error().kind, ErrorKind::protocol);
  EXPECT_FALSE(t->is_open());
}

TEST(TcpTransport, ConnectTimesOutWhenTheAcceptQueueIsFull) {
  // Linux drops SYNs while a listener's accept queue is full (common practice, no source), so a
  // listener that never accepts makes later connects hang: the transport must give up in time.
  int listener = ::socket(AF_INET, SOCK_STREAM | SOCK_CLOEXEC, 0);
  sockaddr_in addr{};
  addr.sin_family = AF_INET;
  addr.sin_addr.s_addr = htonl(INADDR_LOOPBACK);
  ASSERT_EQ(::bind(listener, reinterpret_cast<sockaddr*>(&addr), sizeof addr), 0);
  ASSERT_EQ(::listen(listener, 0), 0);
  socklen_t len = sizeof addr;
  ::getsockname(listener, reinterpret_cast<sockaddr*>(&addr), &len);
  std::vector<int> fillers;
  for (int i = 0; i < 4; ++i) {
    int fd = ::socket(AF_INET, SOCK_STREAM | SOCK_CLOEXEC | SOCK_NONBLOCK, 0);
    ::connect(fd, reinterpret_cast<sockaddr*>(&addr), sizeof addr);
    fillers.push_back(fd);
  }
  std::this_thread::sleep_for(50ms);
  std::string address = "tcp://127.0.0.1:" + std::to_string(ntohs(addr.sin_port));
  auto t = make_transport(address, "switch");
  ASSERT_TRUE(t.ok());
  Status s = (*t)->open(200ms);
  ASSERT_FALSE(s.ok());
  EXPECT_EQ(s.error().kind, ErrorKind::timeout) << s.error().message;
  EXPECT_NE(s.error().message.find("switch (" + address + "): connecting"), std::string::npos);
  for (int fd : fillers) ::close(fd);
  ::close(listener);
}

}  // namespace
}  // namespace echoline::drivers
