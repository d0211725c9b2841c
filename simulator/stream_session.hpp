// StreamSession: one byte stream (a TCP connection or a pty master) serving one LineService:
// splits program messages at LF (a CR before it is dropped), hands each to the service and
// sends what comes back in order, each not before its delay (Asio timers, so every other
// endpoint keeps being served). Internal: includes Asio, so only endpoint .cpp files include it.
// Threading: everything runs on the server's one io thread.
#pragma once

#include <array>
#include <chrono>
#include <deque>
#include <functional>
#include <memory>
#include <string>

#include <asio.hpp>
#include <spdlog/spdlog.h>

#include "simulator/line_service.hpp"

namespace echoline::sim::detail {

// Longest program message accepted; longer input without LF is discarded (and logged).
inline constexpr std::size_t kMaxLineBytes = 1u << 20;

struct SessionHooks {
  // Persistent streams (a pty master) survive read errors: the session forgets what was in
  // flight, calls on_lost(), waits retry_after and reads again. Others end at the first error.
  bool persistent = false;
  std::chrono::milliseconds retry_after{20};
  std::function<void()> on_lost;      // persistent: the peer went away (e.g. flush the pty)
  std::function<void()> on_hang_up;   // persistent: a drop fault (a pty cannot be closed from this side)
  std::function<void()> on_end;       // non-persistent: the session has ended
};

template <typename Stream>
class StreamSession : public std::enable_shared_from_this<StreamSession<Stream>> {
 public:
  using Clock = std::chrono::steady_clock;

  StreamSession(Stream stream, LineService& service, std::string peer, SessionHooks hooks)
      : stream_(std::move(stream)), timer_(stream_.get_executor()), retry_(stream_.get_executor()),
        service_(service), peer_(std::move(peer)), hooks_(std::move(hooks)) {}
  StreamSession(const StreamSession&) = delete;
  StreamSession& operator=(const StreamSession&) = delete;

  void start() {
    if (!hooks_.persistent) mark_connected();
    auto self = this->shared_from_this();
    asio::co_spawn(stream_.get_executor(), [self]() { return self->read_loop(); }, asio::detached);
    asio::co_spawn(stream_.get_executor(), [self]() { return self->write_loop(); }, asio::detached);
  }

  // Ends the session: closes the stream and wakes both loops.
  void stop() {
    if (stopped_) return;
    stopped_ = true;
    asio::error_code ec;
    stream_.close(ec);
    timer_.cancel();
    retry_.cancel();
    if (connected_) service_.on_disconnect(peer_);
    connected_ = false;
    if (auto hook = std::move(hooks_.on_end)) hook();
  }

  // Called once when a non-persistent session ends (the owner forgets it).
  void set_end_hook(std::function<void()> hook) { hooks_.on_end = std::move(hook); }

  Stream& stream() { return stream_; }

 private:
  struct Item {
    Clock::time_point due;
    std::string bytes;
    bool hang_up = false;
  };

  void mark_connected() {
    if (connected_) return;
    connected_ = true;
    service_.on_connect(peer_);
  }

  // Forget partial input and queued replies (the peer is gone or the link was dropped).
  void forget() {
    partial_.clear();
    queue_.clear();
    last_due_ = Clock::time_point{};
    hanging_up_ = false;
  }

  asio::awaitable<void> read_loop() {
    auto self = this->shared_from_this();
    std::array<char, 16384> buf{};
    while (!stopped_) {
      asio::error_code ec;
      const std::size_t n = co_await stream_.async_read_some(asio::buffer(buf), asio::redirect_error(asio::use_awaitable, ec));
      if (stopped_) co_return;
      if (ec) {
        if (!hooks_.persistent) {
          stop();
          co_return;
        }
        // A pty master reads EIO while no slave is open: the client went away (or has not
        // come yet). Drop what was in flight and poll again later.
        if (connected_) {
          connected_ = false;
          service_.on_disconnect(peer_);
          forget();
          if (hooks_.on_lost) hooks_.on_lost();
        }
        retry_.expires_after(hooks_.retry_after);
        asio::error_code wait_ec;
        co_await retry_.async_wait(asio::redirect_error(asio::use_awaitable, wait_ec));
        continue;
      }
      mark_connected();
      feed(std::string_view(buf.data(), n));
    }
  }

  void feed(std::string_view bytes) {
    partial_.append(bytes);
    std::size_t start = 0;
    const auto arrival = Clock::now();
    bool queued = false;
    for (;;) {
      const std::size_t lf = partial_.find('\n', start);
      if (lf == std::string::npos) break;
      std::string_view line(partial_.data() + start, lf - start);
      if (!line.empty() && line.back() == '\r') line.remove_suffix(1);
      start = lf + 1;
      if (hanging_up_) continue;
      for (auto& out : service_.on_line(line, peer_)) {
        const auto due = std::max(last_due_, arrival + std::chrono::duration_cast<Clock::duration>(
                                                           std::chrono::duration<double>(out.delay_s)));
        last_due_ = due;
        queue_.push_back(Item{due, std::move(out.bytes), out.hang_up});
        queued = true;
        if (out.hang_up) {
          hanging_up_ = true;
          break;
        }
      }
    }
    partial_.erase(0, start);
    if (partial_.size() > kMaxLineBytes) {
      spdlog::warn("{} {}: over {} bytes without a line feed; discarded", service_.role(), peer_, kMaxLineBytes);
      partial_.clear();
    }
    if (queued) timer_.cancel();   // wake the writer
  }

  asio::awaitable<void> write_loop() {
    auto self = this->shared_from_this();
    while (!stopped_) {
      asio::error_code ec;
      if (queue_.empty()) {
        timer_.expires_at(Clock::time_point::max());
        co_await timer_.async_wait(asio::redirect_error(asio::use_awaitable, ec));
        continue;
      }
      if (Clock::now() < queue_.front().due) {
        timer_.expires_at(queue_.front().due);
        co_await timer_.async_wait(asio::redirect_error(asio::use_awaitable, ec));
        continue;
      }
      Item item = std::move(queue_.front());
      queue_.pop_front();
      if (item.hang_up) {
        spdlog::warn("{} {}: dropping the connection (fault)", service_.role(), peer_);
        if (!hooks_.persistent) {
          stop();
          co_return;
        }
        forget();
        if (hooks_.on_hang_up) hooks_.on_hang_up();
        continue;
      }
      // Coalesce replies already due into one write (one segment on TCP).
      while (!queue_.empty() && !queue_.front().hang_up && queue_.front().due <= Clock::now()) {
        item.bytes += queue_.front().bytes;
        queue_.pop_front();
      }
      co_await asio::async_write(stream_, asio::buffer(item.bytes), asio::redirect_error(asio::use_awaitable, ec));
      if (stopped_) co_return;
      if (ec) {
        if (!hooks_.persistent) {
          stop();
          co_return;
        }
        spdlog::debug("{} {}: write failed: {}", service_.role(), peer_, ec.message());
      }
    }
  }

  Stream stream_;
  asio::steady_timer timer_;   // the writer sleeps on it; cancel() wakes it
  asio::steady_timer retry_;   // persistent: poll again after a read error
  LineService& service_;
  std::string peer_;
  SessionHooks hooks_;
  std::string partial_;
  std::deque<Item> queue_;
  Clock::time_point last_due_{};
  bool connected_ = false;
  bool stopped_ = false;
  bool hanging_up_ = false;
};

}  // namespace echoline::sim::detail
