// POSIX sockets with poll() deadlines; no Asio (this client opens one connection at a time).
#include "daemon/client/line_connection.hpp"

#include <fcntl.h>
#include <netdb.h>
#include <netinet/in.h>
#include <netinet/tcp.h>
#include <poll.h>
#include <sys/socket.h>
#include <sys/un.h>
#include <unistd.h>

#include <cerrno>
#include <charconv>
#include <cstring>

#include <fmt/format.h>

namespace echoline::client {
namespace {

std::string errno_text(int err) { return std::strerror(err); }

// Finishes a non-blocking connect within `timeout`; returns 0 or an errno value.
int wait_connected(int fd, Millis timeout) {
  pollfd p{fd, POLLOUT, 0};
  int r = ::poll(&p, 1, static_cast<int>(timeout.count()));
  if (r == 0) return ETIMEDOUT;
  if (r < 0) return errno;
  int err = 0;
  socklen_t len = sizeof err;
  if (::getsockopt(fd, SOL_SOCKET, SO_ERROR, &err, &len) != 0) return errno;
  return err;
}

int connect_with_timeout(int fd, const sockaddr* addr, socklen_t len, Millis timeout) {
  const int flags = ::fcntl(fd, F_GETFL, 0);
  ::fcntl(fd, F_SETFL, flags | O_NONBLOCK);
  int err = 0;
  if (::connect(fd, addr, len) != 0) {
    err = errno;
    if (err == EINPROGRESS || err == EAGAIN) err = wait_connected(fd, timeout);
  }
  ::fcntl(fd, F_SETFL, flags);
  return err;
}

}  // namespace

bool split_host_port(std::string_view text, std::string& host, int& port) {
  if (text.substr(0, 6) == "tcp://") text.remove_prefix(6);
  const auto colon = text.rfind(':');
  if (colon == std::string_view::npos || colon == 0 || colon + 1 >= text.size()) return false;
  host = std::string(text.substr(0, colon));
  if (host.size() > 2 && host.front() == '[' && host.back() == ']') host = host.substr(1, host.size() - 2);
  const auto digits = text.substr(colon + 1);
  auto [ptr, ec] = std::from_chars(digits.data(), digits.data() + digits.size(), port);
  return ec == std::errc() && ptr == digits.data() + digits.size() && port > 0 && port < 65536;
}

Result<std::unique_ptr<LineConnection>> LineConnection::connect_unix(const std::string& path, Millis timeout) {
  const std::string address = "unix:" + path;
  sockaddr_un addr{};
  addr.sun_family = AF_UNIX;
  if (path.size() >= sizeof(addr.sun_path)) {
    return make_error(ErrorKind::invalid_argument,
                      fmt::format("{}: socket path longer than {} bytes", address, sizeof(addr.sun_path) - 1));
  }
  std::memcpy(addr.sun_path, path.data(), path.size());
  const int fd = ::socket(AF_UNIX, SOCK_STREAM | SOCK_CLOEXEC, 0);
  if (fd < 0) return make_error(ErrorKind::io, fmt::format("{}: socket: {}", address, errno_text(errno)));
  const int err = connect_with_timeout(fd, reinterpret_cast<const sockaddr*>(&addr), sizeof addr, timeout);
  if (err != 0) {
    ::close(fd);
    return make_error(err == ETIMEDOUT ? ErrorKind::timeout : ErrorKind::io,
                      fmt::format("{}: connect: {}", address, errno_text(err)));
  }
  return std::unique_ptr<LineConnection>(new LineConnection(fd, address));
}

Result<std::unique_ptr<LineConnection>> LineConnection::connect_tcp(const std::string& host, int port, Millis timeout) {
  const std::string address = fmt::format("tcp://{}:{}", host, port);
  addrinfo hints{};
  hints.ai_family = AF_UNSPEC;
  hints.ai_socktype = SOCK_STREAM;
  addrinfo* found = nullptr;
  const std::string service = std::to_string(port);
  if (int rc = ::getaddrinfo(host.c_str(), service.c_str(), &hints, &found); rc != 0) {
    return make_error(ErrorKind::io, fmt::format("{}: resolve: {}", address, ::gai_strerror(rc)));
  }
  int last_err = ECONNREFUSED;
  for (addrinfo* ai = found; ai != nullptr; ai = ai->ai_next) {
    const int fd = ::socket(ai->ai_family, ai->ai_socktype | SOCK_CLOEXEC, ai->ai_protocol);
    if (fd < 0) {
      last_err = errno;
      continue;
    }
    last_err = connect_with_timeout(fd, ai->ai_addr, ai->ai_addrlen, timeout);
    if (last_err == 0) {
      ::freeaddrinfo(found);
      int one = 1;
      ::setsockopt(fd, IPPROTO_TCP, TCP_NODELAY, &one, sizeof one);
      return std::unique_ptr<LineConnection>(new LineConnection(fd, address));
    }
    ::close(fd);
  }
  ::freeaddrinfo(found);
  return make_error(last_err == ETIMEDOUT ? ErrorKind::timeout : ErrorKind::io,
                    fmt::format("{}: connect: {}", address, errno_text(last_err)));
}

Result<std::unique_ptr<LineConnection>> LineConnection::connect_address(std::string_view address, Millis timeout) {
  std::string host;
  int port = 0;
  if (address.substr(0, 6) == "tcp://") {
    if (!split_host_port(address, host, port)) {
      return make_error(ErrorKind::invalid_argument, fmt::format("{}: expected tcp://host:port", address));
    }
    return connect_tcp(host, port, timeout);
  }
  if (address.substr(0, 5) == "unix:") address.remove_prefix(5);
  return connect_unix(std::string(address), timeout);
}

LineConnection::~LineConnection() {
  if (fd_ >= 0) ::close(fd_);
}

Status LineConnection::write_line(std::string_view line) {
  std::string data;
  data.reserve(line.size() + 1);
  data.append(line);
  data.push_back('\n');
  std::size_t sent = 0;
  while (sent < data.size()) {
    const ssize_t n = ::send(fd_, data.data() + sent, data.size() - sent, MSG_NOSIGNAL);
    if (n < 0) {
      if (errno == EINTR) continue;
      const int err = errno;
      return make_error(err == EPIPE || err == ECONNRESET ? ErrorKind::closed : ErrorKind::io,
                        fmt::format("{}: send: {}", address_, errno_text(err)));
    }
    sent += static_cast<std::size_t>(n);
  }
  return Status::success();
}

Result<std::string> LineConnection::read_line(Millis timeout, std::size_t max_bytes) {
  const auto deadline = std::chrono::steady_clock::now() + timeout;
  for (;;) {
    const auto nl = buffer_.find('\n');
    if (nl != std::string::npos) {
      std::string line = buffer_.substr(0, nl);
      buffer_.erase(0, nl + 1);
      if (!line.empty() && line.back() == '\r') line.pop_back();
      return line;
    }
    if (buffer_.size() > max_bytes) {
      return make_error(ErrorKind::protocol, fmt::format("{}: reply line longer than {} bytes", address_, max_bytes));
    }
    const auto left = std::chrono::duration_cast<Millis>(deadline - std::chrono::steady_clock::now());
    if (left.count() <= 0) {
      return make_error(ErrorKind::timeout, fmt::format("{}: no reply within {} ms", address_, timeout.count()));
    }
    pollfd p{fd_, POLLIN, 0};
    const int r = ::poll(&p, 1, static_cast<int>(left.count()));
    if (r < 0) {
      if (errno == EINTR) continue;
      return make_error(ErrorKind::io, fmt::format("{}: poll: {}", address_, errno_text(errno)));
    }
    if (r == 0) continue;
    char chunk[8192];
    const ssize_t n = ::recv(fd_, chunk, sizeof chunk, 0);
    if (n == 0) return make_error(ErrorKind::closed, fmt::format("{}: the peer closed the connection", address_));
    if (n < 0) {
      if (errno == EINTR || errno == EAGAIN) continue;
      const int err = errno;
      return make_error(err == ECONNRESET ? ErrorKind::closed : ErrorKind::io,
                        fmt::format("{}: recv: {}", address_, errno_text(err)));
    }
    buffer_.append(chunk, static_cast<std::size_t>(n));
  }
}

}  // namespace echoline::client
