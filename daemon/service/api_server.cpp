// Asio listeners and line-framed connections for the JSON-lines API.
#include "daemon/service/api_server.hpp"

#include <sys/stat.h>
#include <unistd.h>

#include <atomic>
#include <cerrno>
#include <cstring>
#include <deque>
#include <set>
#include <stdexcept>

#include <asio.hpp>
#include <fmt/format.h>
#include <spdlog/spdlog.h>

namespace echoline::service {
namespace {

using stream_local = asio::local::stream_protocol;
using tcp = asio::ip::tcp;

constexpr std::size_t kMaxQueuedBytes = 32u << 20;   // a client that never reads is dropped

class ConnectionBase : public ClientLink {
 public:
  virtual void start() = 0;
  virtual void shutdown() = 0;
};

template <typename Socket>
class Connection : public ConnectionBase, public std::enable_shared_from_this<Connection<Socket>> {
 public:
  Connection(Socket socket, ApiHandler& handler, ConnectionState state, std::function<void(ConnectionBase*)> on_close)
      : socket_(std::move(socket)), handler_(handler), state_(state), on_close_(std::move(on_close)) {}

  void start() override { read_more(); }

  void send(std::string line) override {
    if (!alive_.load()) return;
    auto self = this->shared_from_this();
    asio::post(socket_.get_executor(), [self, line = std::move(line)]() mutable { self->queue(std::move(line)); });
  }

  bool alive() const override { return alive_.load(); }

  void shutdown() override {
    auto self = this->shared_from_this();
    asio::post(socket_.get_executor(), [self] { self->close(); });
  }

 private:
  void queue(std::string line) {
    if (!alive_.load()) return;
    queued_bytes_ += line.size();
    // One line on an empty queue always goes (a large report asked for); a client that lets
    // lines pile up beyond the cap is not reading and is dropped.
    if (queued_bytes_ > kMaxQueuedBytes && !out_.empty()) {
      spdlog::warn("api: client does not read its replies ({} bytes queued); closing", queued_bytes_);
      close();
      return;
    }
    out_.push_back(std::move(line));
    if (out_.size() == 1) write_next();
  }

  void write_next() {
    auto self = this->shared_from_this();
    asio::async_write(socket_, asio::buffer(out_.front()), [self](std::error_code ec, std::size_t) {
      if (ec) return self->close();
      self->queued_bytes_ -= self->out_.front().size();
      self->out_.pop_front();
      if (!self->out_.empty()) {
        self->write_next();
      } else if (self->close_when_sent_) {
        self->close();
      }
    });
  }

  void read_more() {
    auto self = this->shared_from_this();
    socket_.async_read_some(asio::buffer(chunk_), [self](std::error_code ec, std::size_t n) {
      if (ec) return self->close();
      self->in_.append(self->chunk_.data(), n);
      if (!self->consume_lines()) return;
      self->read_more();
    });
  }

  // Hands every complete line to the handler; false when the connection must stop reading.
  bool consume_lines() {
    std::size_t start = 0;
    for (;;) {
      auto nl = in_.find('\n', start);
      if (nl == std::string::npos) break;
      std::string_view line(in_.data() + start, nl - start);
      start = nl + 1;
      if (line.empty() || (line.size() == 1 && line[0] == '\r')) continue;
      auto self = std::static_pointer_cast<ClientLink>(this->shared_from_this());
      if (!handler_.handle_line(self, state_, line)) return finish_after_reply();
    }
    in_.erase(0, start);
    if (in_.size() >= kMaxLineBytes) {
      // No terminator within the limit: answer once and close.
      auto self = std::static_pointer_cast<ClientLink>(this->shared_from_this());
      handler_.handle_line(self, state_, std::string_view(in_.data(), kMaxLineBytes));
      return finish_after_reply();
    }
    return true;
  }

  bool finish_after_reply() {
    close_when_sent_ = true;
    in_.clear();
    return false;
  }

  void close() {
    if (!alive_.exchange(false)) return;
    std::error_code ec;
    socket_.shutdown(Socket::shutdown_both, ec);
    socket_.close(ec);
    if (on_close_) on_close_(this);
  }

  Socket socket_;
  ApiHandler& handler_;
  ConnectionState state_;
  std::function<void(ConnectionBase*)> on_close_;
  std::atomic<bool> alive_{true};
  std::array<char, 8192> chunk_{};
  std::string in_;
  std::deque<std::string> out_;
  std::size_t queued_bytes_ = 0;
  bool close_when_sent_ = false;
};

bool is_loopback(const asio::ip::address& a) { return a.is_loopback(); }

class AsioServer final : public ApiServer {
 public:
  AsioServer(ApiHandler& handler, const ServerOptions& options) : handler_(handler), options_(options) {
    if (!options.unix_socket.empty()) open_unix();
    if (options.tcp_port != 0) open_tcp();
    if (!unix_acceptor_ && !tcp_acceptor_) throw std::runtime_error("api: neither a Unix socket nor a TCP port is configured");
  }

  ~AsioServer() override {
    remove_socket_file();
  }

  void run() override {
    auto guard = asio::make_work_guard(io_);
    if (unix_acceptor_) accept_unix();
    if (tcp_acceptor_) accept_tcp();
    io_.run();
  }

  void stop_accepting() override {
    asio::post(io_, [this] {
      std::error_code ec;
      if (unix_acceptor_) unix_acceptor_->close(ec);
      if (tcp_acceptor_) tcp_acceptor_->close(ec);
      remove_socket_file();
    });
  }

  void stop() override {
    asio::post(io_, [this] {
      auto conns = connections_;
      for (auto& c : conns) c->shutdown();
      asio::post(io_, [this] { io_.stop(); });
    });
  }

  std::string unix_path() const override { return unix_acceptor_ ? options_.unix_socket.string() : ""; }
  std::string tcp_address() const override { return tcp_text_; }

 private:
  void open_unix() {
    const auto& path = options_.unix_socket;
    std::error_code fec;
    std::filesystem::create_directories(path.parent_path(), fec);
    struct stat st {};
    if (::lstat(path.c_str(), &st) == 0) {
      if (!S_ISSOCK(st.st_mode)) {
        throw std::runtime_error(fmt::format("api: {} exists and is not a socket; refusing to replace it", path.string()));
      }
      stream_local::socket probe(io_);
      std::error_code ec;
      probe.connect(stream_local::endpoint(path.string()), ec);
      if (!ec) throw std::runtime_error(fmt::format("api: {}: another daemon is listening there", path.string()));
      ::unlink(path.c_str());
      spdlog::info("api: removed stale socket {}", path.string());
    }
    unix_acceptor_ = std::make_unique<stream_local::acceptor>(io_);
    std::error_code ec;
    stream_local::endpoint ep(path.string());
    unix_acceptor_->open(ep.protocol(), ec);
    if (!ec) unix_acceptor_->bind(ep, ec);
    if (ec) throw std::runtime_error(fmt::format("api: cannot bind {}: {}", path.string(), ec.message()));
    socket_file_ = path;
    // Permissions before listen(): until then a connect() is refused, so no client ever reaches
    // the socket with the looser mode bind() gave it.
    if (::chmod(path.c_str(), static_cast<mode_t>(options_.socket_mode)) != 0) {
      const int err = errno;
      throw std::runtime_error(fmt::format("api: cannot set mode {:o} on {}: {}", options_.socket_mode, path.string(),
                                           std::strerror(err)));
    }
    unix_acceptor_->listen(asio::socket_base::max_listen_connections, ec);
    if (ec) throw std::runtime_error(fmt::format("api: cannot listen on {}: {}", path.string(), ec.message()));
  }

  void open_tcp() {
    std::error_code ec;
    auto address = asio::ip::make_address(options_.tcp_host, ec);
    if (ec) throw std::runtime_error(fmt::format("api: tcp_host \"{}\" is not an IP address", options_.tcp_host));
    if (!is_loopback(address) && !options_.token_configured) {
      throw std::runtime_error(fmt::format(
          "api: TCP on non-loopback address {} needs a token file (api.token_file); refusing to listen", options_.tcp_host));
    }
    const unsigned short port = options_.tcp_port < 0 ? 0 : static_cast<unsigned short>(options_.tcp_port);
    tcp::endpoint ep(address, port);
    tcp_acceptor_ = std::make_unique<tcp::acceptor>(io_);
    tcp_acceptor_->open(ep.protocol(), ec);
    if (!ec) tcp_acceptor_->set_option(asio::socket_base::reuse_address(true), ec);
    if (!ec) tcp_acceptor_->bind(ep, ec);
    if (!ec) tcp_acceptor_->listen(asio::socket_base::max_listen_connections, ec);
    if (ec) throw std::runtime_error(fmt::format("api: cannot listen on {}:{}: {}", options_.tcp_host, port, ec.message()));
    auto local = tcp_acceptor_->local_endpoint();
    tcp_text_ = fmt::format("{}:{}", local.address().to_string(), local.port());
  }

  void remove_socket_file() {
    if (!socket_file_.empty()) {
      ::unlink(socket_file_.c_str());
      socket_file_.clear();
    }
  }

  template <typename Socket>
  void adopt(Socket socket, ConnectionState state) {
    auto conn = std::make_shared<Connection<Socket>>(std::move(socket), handler_, state,
                                                     [this](ConnectionBase* c) { forget(c); });
    connections_.insert(conn);
    conn->start();
  }

  void forget(ConnectionBase* c) {
    for (auto it = connections_.begin(); it != connections_.end(); ++it) {
      if (it->get() == c) {
        // Keep the object alive until its handlers return: erase on the next turn.
        auto keep = *it;
        connections_.erase(it);
        asio::post(io_, [keep] {});
        return;
      }
    }
  }

  void accept_unix() {
    unix_acceptor_->async_accept([this](std::error_code ec, stream_local::socket s) {
      if (ec) {
        if (ec != asio::error::operation_aborted) spdlog::warn("api: unix accept: {}", ec.message());
        if (!unix_acceptor_->is_open()) return;
      } else {
        adopt(std::move(s), ConnectionState{Role::operator_, true});
      }
      accept_unix();
    });
  }

  void accept_tcp() {
    tcp_acceptor_->async_accept([this](std::error_code ec, tcp::socket s) {
      if (ec) {
        if (ec != asio::error::operation_aborted) spdlog::warn("api: tcp accept: {}", ec.message());
        if (!tcp_acceptor_->is_open()) return;
      } else {
        std::error_code e2;
        s.set_option(tcp::no_delay(true), e2);
        auto peer = s.remote_endpoint(e2);
        const bool loop = !e2 && is_loopback(peer.address());
        adopt(std::move(s), ConnectionState{loop ? Role::operator_ : Role::none, loop});
      }
      accept_tcp();
    });
  }

  ApiHandler& handler_;
  ServerOptions options_;
  asio::io_context io_;
  std::unique_ptr<stream_local::acceptor> unix_acceptor_;
  std::unique_ptr<tcp::acceptor> tcp_acceptor_;
  std::filesystem::path socket_file_;
  std::string tcp_text_;
  std::set<std::shared_ptr<ConnectionBase>> connections_;
};

}  // namespace

std::unique_ptr<ApiServer> ApiServer::create(ApiHandler& handler, const ServerOptions& options) {
  return std::make_unique<AsioServer>(handler, options);
}

}  // namespace echoline::service
