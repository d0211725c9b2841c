// TCP transport (SCPI raw socket, e.g. port 5025) on Asio. Owns one socket and its own
// io_context; every call runs its async operation with a deadline (io_context::run_for).
// Threading: one user thread at a time; not copyable. Asio stays inside tcp_transport.cpp.
#pragma once

#include <cstdint>
#include <memory>
#include <string>
#include <string_view>

#include "drivers/transport.hpp"

namespace echoline::drivers {

struct TcpEndpoint {
  std::string host;        // name or address; IPv6 literals without brackets
  std::uint16_t port = 0;  // 1..65535
};

// Parses "tcp://host:port" (IPv6 as "tcp://[::1]:5025"). Errors are ErrorKind::config naming the address.
Result<TcpEndpoint> parse_tcp_address(std::string_view address);

// Sets TCP_NODELAY and sends each command in one write: a small write held back by Nagle's
// algorithm (RFC 896) until the peer's delayed ACK (RFC 1122 §4.2.3.2) would add the
// delayed-ACK wait, tens of milliseconds, to every query.
// After a read or write timeout, or when the peer closes, the socket is closed and buffered
// input discarded; the next call reports ErrorKind::closed until reconnect().
std::unique_ptr<Transport> make_tcp_transport(TcpEndpoint endpoint, std::string address, std::string instrument_name);

}  // namespace echoline::drivers
