// FaultTransport: wraps another Transport and injects link faults on command: cut a reply short,
// stall past the deadline, split writes into small pieces, drop the link. Used by session tests
// over both the memory and the TCP transport. Threading: one user thread at a time (the plan is
// shared with the test, which changes it only between calls).
#pragma once

#include <cstddef>
#include <memory>
#include <string>

#include "drivers/transport.hpp"

namespace echoline::drivers {

struct FaultPlan {
  // The next read delivers at most this many more bytes, then behaves as a silent peer
  // (ErrorKind::timeout after its deadline, link closed). npos = no cut.
  std::size_t cut_after_bytes = static_cast<std::size_t>(-1);
  // The next read waits its whole deadline, then fails with ErrorKind::timeout; the link is
  // closed so the late reply is discarded.
  bool stall_next_read = false;
  // Every write is sent as pieces of at most this many bytes (0 = unchanged); exercises the
  // peer's reassembly of split lines.
  std::size_t split_writes_into = 0;
  // The link drops before the next operation (read or write): ErrorKind::closed.
  bool drop_before_next = false;
  // Counters, for assertions.
  int faults_injected = 0;
};

class FaultTransport final : public Transport {
 public:
  FaultTransport(std::unique_ptr<Transport> inner, std::shared_ptr<FaultPlan> plan);
  Status open(Millis timeout) override;
  Status write(std::string_view bytes, Millis timeout) override;
  Result<std::string> read_until(char terminator, Millis timeout, std::size_t max_bytes) override;
  Result<std::string> read_exact(std::size_t n, Millis timeout) override;
  void close() override;
  Status reconnect(Millis timeout) override;
  bool is_open() const override;
  std::string address() const override;

 private:
  // Applies drop / stall before a read; returns an error when a fault fired.
  Status before(std::string_view doing, Millis timeout);
  // Applies the byte budget to a read that delivered `bytes` (+1 for a stripped terminator).
  Status budget(std::size_t bytes, std::string_view doing, Millis timeout);
  Error fail(ErrorKind kind, std::string_view doing, std::string_view what) const;

  std::unique_ptr<Transport> inner_;
  std::shared_ptr<FaultPlan> plan_;
};

}  // namespace echoline::drivers
