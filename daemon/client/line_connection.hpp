// A line-oriented stream connection (Unix socket or TCP) with a deadline on every read:
// the transport under the daemon API client and the simulator fixture client.
// One user thread at a time; owns its socket (copy deleted).
#pragma once

#include <chrono>
#include <memory>
#include <string>
#include <string_view>

#include "drivers/result.hpp"

namespace echoline::client {

using Millis = std::chrono::milliseconds;

class LineConnection {
 public:
  // Connects to a Unix socket at `path`. Errors (io, timeout) name the address.
  static Result<std::unique_ptr<LineConnection>> connect_unix(const std::string& path, Millis timeout);
  // Connects to host:port over TCP (TCP_NODELAY set).
  static Result<std::unique_ptr<LineConnection>> connect_tcp(const std::string& host, int port, Millis timeout);
  // "tcp://host:port" or "host:port" -> connect_tcp; anything else is a Unix socket path.
  static Result<std::unique_ptr<LineConnection>> connect_address(std::string_view address, Millis timeout);

  ~LineConnection();
  LineConnection(const LineConnection&) = delete;
  LineConnection& operator=(const LineConnection&) = delete;

  // Sends `line` followed by '\n' in one write where possible.
  Status write_line(std::string_view line);
  // Next line without its '\n' (a trailing '\r' is removed too). Errors: timeout (the connection
  // stays usable), closed (peer closed), io, protocol (line longer than max_bytes).
  Result<std::string> read_line(Millis timeout, std::size_t max_bytes = 16u << 20);
  const std::string& address() const { return address_; }

 private:
  LineConnection(int fd, std::string address) : fd_(fd), address_(std::move(address)) {}
  int fd_ = -1;
  std::string address_;
  std::string buffer_;
};

// Splits "host:port" (or "tcp://host:port"); false when malformed.
bool split_host_port(std::string_view text, std::string& host, int& port);

}  // namespace echoline::client
