// In-memory scripted transport for unit tests. See memory_transport.hpp.
#include "drivers/memory_transport.hpp"

#include <fmt/format.h>

#include "drivers/scpi_codec.hpp"

namespace echoline::drivers {

void MemoryPeer::expect(std::string command, std::string reply) {
  script_.emplace_back(std::move(command), std::move(reply));
}

void MemoryPeer::set_responder(Responder responder) { responder_ = std::move(responder); }

void MemoryPeer::push_input(std::string_view bytes) { input_.append(bytes); }

void MemoryPeer::on_line(std::string line) {
  lines_.push_back(line);
  if (!script_.empty()) {
    auto [command, reply] = std::move(script_.front());
    script_.pop_front();
    if (command != line) {
      mismatches_.push_back(fmt::format("expected {}, got {}", scpi::quote(command), scpi::quote(line)));
    }
    input_ += reply;
    return;
  }
  if (responder_) {
    input_ += responder_(line);
    return;
  }
  mismatches_.push_back(fmt::format("unexpected line {}", scpi::quote(line)));
}

MemoryTransport::MemoryTransport(std::shared_ptr<MemoryPeer> peer, std::string address, std::string instrument_name)
    : peer_(std::move(peer)), address_(std::move(address)), name_(std::move(instrument_name)) {}

Error MemoryTransport::fail(ErrorKind kind, std::string_view doing, std::string_view what) const {
  return make_error(kind, fmt::format("{} ({}): {}: {}", name_, address_, doing, what));
}

Status MemoryTransport::open(Millis) {
  ++peer_->opens_;
  if (peer_->refuse_open_) {
    peer_->refuse_open_ = false;
    return fail(ErrorKind::closed, "connecting", "connection refused");
  }
  open_ = true;
  return {};
}

Status MemoryTransport::write(std::string_view bytes, Millis) {
  if (!open_) return fail(ErrorKind::closed, "writing", "not connected");
  for (char c : bytes) {
    if (c == '\n') {
      peer_->on_line(std::move(peer_->partial_line_));
      peer_->partial_line_.clear();
    } else {
      peer_->partial_line_ += c;
    }
  }
  return {};
}

Result<std::string> MemoryTransport::read_until(char terminator, Millis timeout, std::size_t max_bytes) {
  if (!open_) return fail(ErrorKind::closed, "reading reply", "not connected");
  std::string& in = peer_->input_;
  std::size_t found = in.find(terminator);
  if (found == std::string::npos || found > max_bytes) {
    bool too_long = in.size() > max_bytes;
    std::size_t partial = in.size();
    close();
    if (too_long) return fail(ErrorKind::protocol, "reading reply", fmt::format("no terminator within {} bytes", max_bytes));
    return fail(ErrorKind::timeout, "reading reply",
                fmt::format("no complete reply within {} ms ({} bytes arrived); link closed", timeout.count(), partial));
  }
  std::string line = in.substr(0, found);
  in.erase(0, found + 1);
  return line;
}

Result<std::string> MemoryTransport::read_exact(std::size_t n, Millis timeout) {
  if (!open_) return fail(ErrorKind::closed, "reading", "not connected");
  std::string& in = peer_->input_;
  if (in.size() < n) {
    std::size_t got = in.size();
    close();
    return fail(ErrorKind::timeout, fmt::format("reading {} bytes", n),
                fmt::format("only {} arrived within {} ms; link closed", got, timeout.count()));
  }
  std::string out = in.substr(0, n);
  in.erase(0, n);
  return out;
}

void MemoryTransport::close() {
  open_ = false;
  peer_->input_.clear();
  peer_->partial_line_.clear();
}

Status MemoryTransport::reconnect(Millis timeout) {
  close();
  return open(timeout);
}

}  // namespace echoline::drivers
