#include "simulator/tcp_endpoint.hpp"

#include <set>
#include <stdexcept>

#include <fmt/format.h>

#include "simulator/stream_session.hpp"

namespace echoline::sim {

using Session = detail::StreamSession<asio::ip::tcp::socket>;

struct TcpEndpoint::Impl : std::enable_shared_from_this<TcpEndpoint::Impl> {
  Impl(asio::io_context& io, LineService& s) : acceptor(io), service(s) {}

  asio::ip::tcp::acceptor acceptor;
  LineService& service;
  std::set<std::shared_ptr<Session>> sessions;
  bool stopped = false;

  void accept() {
    auto self = shared_from_this();
    acceptor.async_accept([self](asio::error_code ec, asio::ip::tcp::socket socket) {
      if (self->stopped) return;
      if (ec) {
        spdlog::warn("{}: accept failed: {}", self->service.role(), ec.message());
      } else {
        self->serve(std::move(socket));
      }
      self->accept();
    });
  }

  void serve(asio::ip::tcp::socket socket) {
    asio::error_code ec;
    socket.set_option(asio::ip::tcp::no_delay(true), ec);   // one reply, one segment, no Nagle wait
    const auto remote = socket.remote_endpoint(ec);
    const std::string peer = ec ? "tcp ?" : fmt::format("tcp {}:{}", remote.address().to_string(), remote.port());
    auto session = std::make_shared<Session>(std::move(socket), service, peer, detail::SessionHooks{});
    std::weak_ptr<Impl> weak = shared_from_this();
    Session* key = session.get();
    session->set_end_hook([weak, key]() {
      if (auto impl = weak.lock()) {
        for (auto it = impl->sessions.begin(); it != impl->sessions.end(); ++it) {
          if (it->get() == key) {
            impl->sessions.erase(it);
            break;
          }
        }
      }
    });
    sessions.insert(session);
    session->start();
  }
};

TcpEndpoint::TcpEndpoint(asio::io_context& io, const std::string& host, int port, LineService& service)
    : impl_(std::make_shared<Impl>(io, service)) {
  asio::error_code ec;
  const auto address = asio::ip::make_address(host, ec);
  if (ec) throw std::runtime_error(fmt::format("{}: cannot listen on {}:{}: bad address: {}", service.role(), host, port, ec.message()));
  const asio::ip::tcp::endpoint endpoint(address, static_cast<unsigned short>(port));
  impl_->acceptor.open(endpoint.protocol(), ec);
  if (!ec) impl_->acceptor.set_option(asio::ip::tcp::acceptor::reuse_address(true), ec);
  if (!ec) impl_->acceptor.bind(endpoint, ec);
  if (!ec) impl_->acceptor.listen(asio::socket_base::max_listen_connections, ec);
  if (ec) throw std::runtime_error(fmt::format("{}: cannot listen on {}:{}: {}", service.role(), host, port, ec.message()));
}

TcpEndpoint::~TcpEndpoint() { stop(); }

void TcpEndpoint::start() { impl_->accept(); }

void TcpEndpoint::stop() {
  if (impl_->stopped) return;
  impl_->stopped = true;
  asio::error_code ec;
  impl_->acceptor.close(ec);
  auto sessions = std::move(impl_->sessions);
  impl_->sessions.clear();
  for (const auto& s : sessions) s->stop();
}

std::string TcpEndpoint::address() const {
  asio::error_code ec;
  const auto local = impl_->acceptor.local_endpoint(ec);
  return fmt::format("tcp://{}:{}", local.address().to_string(), local.port());
}

int TcpEndpoint::port() const {
  asio::error_code ec;
  return impl_->acceptor.local_endpoint(ec).port();
}

}  // namespace echoline::sim
