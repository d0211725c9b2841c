// TCP transport on Asio: deadlines from async operations + io_context::run_for (SO_RCVTIMEO does
// not bound Asio's synchronous reads). See tcp_transport.hpp.
#include "drivers/tcp_transport.hpp"

#include <algorithm>
#include <array>
#include <charconv>
#include <chrono>
#include <optional>

#include <asio.hpp>
#include <fmt/format.h>

#include "drivers/scpi_codec.hpp"
#include "drivers/wire.hpp"

namespace echoline::drivers {

Result<TcpEndpoint> parse_tcp_address(std::string_view address) {
  auto bad = [&](std::string_view why) {
    return make_error(ErrorKind::config,
                      fmt::format("instrument address \"{}\": {} (expected \"tcp://host:port\")", address, why));
  };
  if (!address.starts_with(wire::kTcpScheme)) return bad("does not start with tcp://");
  std::string_view rest = address.substr(wire::kTcpScheme.size());
  std::string_view host;
  std::string_view port_text;
  if (rest.starts_with('[')) {
    std::size_t close = rest.find(']');
    if (close == std::string_view::npos) return bad("unclosed '[' in an IPv6 host");
    host = rest.substr(1, close - 1);
    rest.remove_prefix(close + 1);
    if (!rest.starts_with(':')) return bad("missing :port");
    port_text = rest.substr(1);
  } else {
    std::size_t colon = rest.rfind(':');
    if (colon == std::string_view::npos) return bad("missing :port");
    host = rest.substr(0, colon);
    port_text = rest.substr(colon + 1);
  }
  if (host.empty()) return bad("empty host");
  unsigned port = 0;
  auto [end, ec] = std::from_chars(port_text.data(), port_text.data() + port_text.size(), port);
  if (port_text.empty() || ec != std::errc{} || end != port_text.data() + port_text.size() || port == 0 ||
      port > 65535) {
    return bad(fmt::format("port \"{}\" is not a number in 1..65535", port_text));
  }
  return TcpEndpoint{std::string(host), static_cast<std::uint16_t>(port)};
}

namespace {

using asio::ip::tcp;
using Clock = std::chrono::steady_clock;

class TcpTransport final : public Transport {
 public:
  TcpTransport(TcpEndpoint endpoint, std::string address, std::string name)
      : endpoint_(std::move(endpoint)), address_(std::move(address)), name_(std::move(name)) {}
  ~TcpTransport() override { close(); }

  Status open(Millis timeout) override {
    close();
    tcp::resolver resolver(io_);
    asio::error_code ec = asio::error::would_block;
    tcp::resolver::results_type endpoints;
    resolver.async_resolve(endpoint_.host, std::to_string(endpoint_.port),
                           [&](const asio::error_code& e, tcp::resolver::results_type r) {
                             ec = e;
                             endpoints = std::move(r);
                           });
    if (!run(timeout, [&] { resolver.cancel(); })) {
      return fail(ErrorKind::timeout, "resolving host", fmt::format("no answer within {} ms", timeout.count()));
    }
    if (ec) return fail(ErrorKind::io, "resolving host", ec.message());

    ec = asio::error::would_block;
    asio::async_connect(socket_, endpoints, [&](const asio::error_code& e, const tcp::endpoint&) { ec = e; });
    if (!run(timeout, [&] { close_socket(); })) {
      return fail(ErrorKind::timeout, "connecting", fmt::format("no connection within {} ms", timeout.count()));
    }
    if (ec) {
      close_socket();
      return fail(ec == asio::error::connection_refused ? ErrorKind::closed : ErrorKind::io, "connecting",
                  ec.message());
    }
    asio::error_code opt_ec;
    socket_.set_option(tcp::no_delay(true), opt_ec);
    if (opt_ec) {
      close_socket();
      return fail(ErrorKind::io, "setting TCP_NODELAY", opt_ec.message());
    }
    socket_.set_option(asio::socket_base::keep_alive(true), opt_ec);   // best effort
    return {};
  }

  Status write(std::string_view bytes, Millis timeout) override {
    if (!socket_.is_open()) return not_open("writing");
    asio::error_code ec = asio::error::would_block;
    asio::async_write(socket_, asio::buffer(bytes.data(), bytes.size()),
                      [&](const asio::error_code& e, std::size_t) { ec = e; });
    if (!run(timeout, [&] { close(); })) {
      return fail(ErrorKind::timeout, "writing",
                  fmt::format("{} bytes not sent within {} ms; link closed", bytes.size(), timeout.count()));
    }
    if (ec) {
      const Error e = link_error(ec);
      return io_failure("writing", e.kind, e.message);
    }
    return {};
  }

  Result<std::string> read_until(char terminator, Millis timeout, std::size_t max_bytes) override {
    if (!socket_.is_open()) return not_open("reading reply");
    const auto deadline = Clock::now() + timeout;
    std::size_t scanned = 0;
    for (;;) {
      const std::size_t found = buffer_.find(terminator, scanned);
      if (found != std::string::npos && found <= max_bytes) {
        std::string line = buffer_.substr(0, found);
        buffer_.erase(0, found + 1);
        return line;
      }
      if (buffer_.size() > max_bytes) return too_long(max_bytes);
      scanned = buffer_.size();
      // At most max_bytes and the terminator in the buffer: a longer reply is refused unread.
      if (Status s = fill(deadline, max_bytes + 1 - buffer_.size()); !s) {
        if (s.error().kind != ErrorKind::timeout) return io_failure("reading reply", s.error().kind, s.error().message);
        std::string what = fmt::format("no complete reply within {} ms ({}); link closed", timeout.count(),
                                       arrived_text());
        close();
        return fail(ErrorKind::timeout, "reading reply", what);
      }
    }
  }

  Result<std::string> read_exact(std::size_t n, Millis timeout) override {
    if (!socket_.is_open()) return not_open("reading");
    const auto deadline = Clock::now() + timeout;
    while (buffer_.size() < n) {
      if (Status s = fill(deadline, n - buffer_.size()); !s) {
        const std::string doing = fmt::format("reading {} bytes", n);
        if (s.error().kind != ErrorKind::timeout) return io_failure(doing, s.error().kind, s.error().message);
        std::string what = fmt::format("only {} of them arrived within {} ms; link closed", buffer_.size(),
                                       timeout.count());
        close();
        return fail(ErrorKind::timeout, doing, what);
      }
    }
    std::string out = buffer_.substr(0, n);
    buffer_.erase(0, n);
    return out;
  }

  void close() override {
    close_socket();
    buffer_.clear();
  }

  Status reconnect(Millis timeout) override {
    close();
    return open(timeout);
  }

  bool is_open() const override { return socket_.is_open(); }
  std::string address() const override { return address_; }

 private:
  // Runs the io_context until the pending operation completes or `timeout` passes. On timeout,
  // `cancel` aborts the operation and its handler is run; returns false.
  template <typename Cancel>
  bool run(Millis timeout, Cancel cancel) {
    io_.restart();
    io_.run_for(timeout);
    if (io_.stopped()) return true;
    cancel();
    io_.restart();
    io_.run();
    return false;
  }

  void close_socket() {
    asio::error_code ignored;
    if (socket_.is_open()) {
      socket_.shutdown(tcp::socket::shutdown_both, ignored);
      socket_.close(ignored);
    }
  }

  Error fail(ErrorKind kind, std::string_view doing, std::string_view what) const {
    return make_error(kind, fmt::format("{} ({}): {}: {}", name_, address_, doing, what));
  }

  Error not_open(std::string_view doing) const {
    return fail(ErrorKind::closed, doing, "not connected (closed after an earlier error; reconnect first)");
  }

  Error too_long(std::size_t max_bytes) {
    close();
    return fail(ErrorKind::protocol, "reading reply",
                fmt::format("no terminator within {} bytes; link closed", max_bytes));
  }

  // One read of at most `limit` bytes before `deadline`; what arrives is appended to buffer_ (only
  // the bytes received: buffer_ never holds reserved space). A timeout is ErrorKind::timeout with
  // the link still open; a failed read is ErrorKind::closed (peer gone) or io with its reason.
  Status fill(Clock::time_point deadline, std::size_t limit) {
    const auto left = std::chrono::duration_cast<Millis>(deadline - Clock::now());
    if (left.count() <= 0) return make_error(ErrorKind::timeout, "deadline passed");
    std::array<char, 4096> chunk;
    const std::size_t want = std::min(limit, chunk.size());
    asio::error_code ec = asio::error::would_block;
    std::size_t got = 0;
    socket_.async_read_some(asio::buffer(chunk.data(), want), [&](const asio::error_code& e, std::size_t k) {
      ec = e;
      got = k;
    });
    const bool completed = run(left, [&] { close_socket(); });
    buffer_.append(chunk.data(), got);   // kept for the timeout message
    // A read cut off by the deadline is a timeout even if some bytes came in: the socket was
    // closed to cancel it, so nothing more can be read or written on this link.
    if (!completed) return make_error(ErrorKind::timeout, "deadline passed");
    if (!ec) return {};
    return link_error(ec);
  }

  // A failed socket operation: ErrorKind::closed when the peer went away, io otherwise.
  static Error link_error(const asio::error_code& ec) {
    if (ec == asio::error::eof || ec == asio::error::connection_reset || ec == asio::error::broken_pipe)
      return make_error(ErrorKind::closed, ec == asio::error::eof ? "connection closed by the peer" : ec.message());
    return make_error(ErrorKind::io, ec.message());
  }

  // For a timeout message: how much of the reply arrived, with the start of it.
  std::string arrived_text() const {
    if (buffer_.empty()) return "nothing arrived";
    return fmt::format("{} bytes arrived: {}", buffer_.size(), scpi::quote(buffer_, wire::kPartialReplyQuoteLimit));
  }

  Error io_failure(std::string_view doing, ErrorKind kind, std::string what) {
    const std::size_t buffered = buffer_.size();
    close();
    if (kind == ErrorKind::closed && buffered > 0)
      what += fmt::format(" ({} bytes of an unfinished reply discarded)", buffered);
    return fail(kind, doing, what);
  }

  TcpEndpoint endpoint_;
  std::string address_;
  std::string name_;
  asio::io_context io_;
  tcp::socket socket_{io_};
  std::string buffer_;   // bytes received and not yet returned
};

}  // namespace

std::unique_ptr<Transport> make_tcp_transport(TcpEndpoint endpoint, std::string address, std::string instrument_name) {
  return std::make_unique<TcpTransport>(std::move(endpoint), std::move(address), std::move(instrument_name));
}

}  // namespace echoline::drivers
