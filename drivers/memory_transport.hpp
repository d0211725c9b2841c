// MemoryTransport: an in-memory scripted peer for codec and session unit tests (no sockets).
// The MemoryPeer holds the script and what was written; the test keeps a shared_ptr to it while
// the session owns the transport. Threading: single thread only (no waiting: a read that cannot
// be satisfied times out at once, as if the deadline had passed).
#pragma once

#include <deque>
#include <functional>
#include <memory>
#include <string>
#include <string_view>
#include <vector>

#include "drivers/transport.hpp"

namespace echoline::drivers {

class MemoryPeer {
 public:
  // Handles one complete line written (terminator stripped) and returns the bytes to send back
  // ("" = no reply). Used when no scripted expectation is pending.
  using Responder = std::function<std::string(std::string_view line)>;

  // Scripts the next exchange: when the line `command` is written, queue `reply` (raw bytes,
  // terminator included by the caller). Expectations are consumed in order.
  void expect(std::string command, std::string reply);
  void set_responder(Responder responder);
  // Queues bytes to read as if they had arrived unasked.
  void push_input(std::string_view bytes);
  // Makes the next open() fail with ErrorKind::closed (a refused connection).
  void refuse_next_open() { refuse_open_ = true; }

  const std::vector<std::string>& lines_written() const { return lines_; }   // terminator stripped
  std::size_t pending_input() const { return input_.size(); }
  // Lines that did not match the scripted expectation, as "expected X, got Y".
  const std::vector<std::string>& mismatches() const { return mismatches_; }
  bool script_done() const { return script_.empty(); }
  int open_count() const { return opens_; }

 private:
  friend class MemoryTransport;
  void on_line(std::string line);

  std::deque<std::pair<std::string, std::string>> script_;
  Responder responder_;
  std::string input_;         // bytes the transport will read
  std::string partial_line_;  // written bytes not yet ending in '\n'
  std::vector<std::string> lines_;
  std::vector<std::string> mismatches_;
  bool refuse_open_ = false;
  int opens_ = 0;
};

// Lines written are split on '\n' (a trailing '\r' is kept). Input queued before open() is kept
// (it models what the peer sends); close() discards it, as the real transports do.
class MemoryTransport final : public Transport {
 public:
  MemoryTransport(std::shared_ptr<MemoryPeer> peer, std::string address = "memory://peer",
                  std::string instrument_name = "memory");
  Status open(Millis timeout) override;
  Status write(std::string_view bytes, Millis timeout) override;
  Result<std::string> read_until(char terminator, Millis timeout, std::size_t max_bytes) override;
  Result<std::string> read_exact(std::size_t n, Millis timeout) override;
  void close() override;
  Status reconnect(Millis timeout) override;
  bool is_open() const override { return open_; }
  std::string address() const override { return address_; }

 private:
  Error fail(ErrorKind kind, std::string_view doing, std::string_view what) const;

  std::shared_ptr<MemoryPeer> peer_;
  std::string address_;
  std::string name_;
  bool open_ = false;
};

}  // namespace echoline::drivers
