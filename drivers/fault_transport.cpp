// Fault-injecting Transport wrapper. See fault_transport.hpp.
#include "drivers/fault_transport.hpp"

#include <algorithm>
#include <thread>

#include <fmt/format.h>

namespace echoline::drivers {

namespace {
constexpr std::size_t kNoCut = static_cast<std::size_t>(-1);
}

FaultTransport::FaultTransport(std::unique_ptr<Transport> inner, std::shared_ptr<FaultPlan> plan)
    : inner_(std::move(inner)), plan_(std::move(plan)) {}

Error FaultTransport::fail(ErrorKind kind, std::string_view doing, std::string_view what) const {
  return make_error(kind, fmt::format("{}: {}: {} (injected fault)", inner_->address(), doing, what));
}

Status FaultTransport::before(std::string_view doing, Millis timeout) {
  if (plan_->drop_before_next) {
    plan_->drop_before_next = false;
    ++plan_->faults_injected;
    inner_->close();
    return fail(ErrorKind::closed, doing, "connection dropped");
  }
  if (plan_->stall_next_read) {
    plan_->stall_next_read = false;
    ++plan_->faults_injected;
    std::this_thread::sleep_for(timeout);
    inner_->close();
    return fail(ErrorKind::timeout, doing, fmt::format("no reply within {} ms; link closed", timeout.count()));
  }
  return {};
}

Status FaultTransport::budget(std::size_t bytes, std::string_view doing, Millis timeout) {
  if (plan_->cut_after_bytes == kNoCut) return {};
  if (bytes <= plan_->cut_after_bytes) {
    plan_->cut_after_bytes -= bytes;
    return {};
  }
  std::size_t delivered = plan_->cut_after_bytes;
  plan_->cut_after_bytes = kNoCut;
  ++plan_->faults_injected;
  std::this_thread::sleep_for(timeout);
  inner_->close();
  return fail(ErrorKind::timeout, doing,
              fmt::format("reply cut short after {} bytes, nothing more within {} ms; link closed", delivered,
                          timeout.count()));
}

Status FaultTransport::open(Millis timeout) { return inner_->open(timeout); }

Status FaultTransport::write(std::string_view bytes, Millis timeout) {
  if (plan_->drop_before_next) {
    plan_->drop_before_next = false;
    ++plan_->faults_injected;
    inner_->close();
    return fail(ErrorKind::closed, "writing", "connection dropped");
  }
  std::size_t piece = plan_->split_writes_into;
  if (piece == 0) return inner_->write(bytes, timeout);
  for (std::size_t off = 0; off < bytes.size(); off += piece) {
    if (Status s = inner_->write(bytes.substr(off, piece), timeout); !s) return s;
  }
  return {};
}

Result<std::string> FaultTransport::read_until(char terminator, Millis timeout, std::size_t max_bytes) {
  if (Status s = before("reading reply", timeout); !s) return s.error();
  auto line = inner_->read_until(terminator, timeout, max_bytes);
  if (!line) return line;
  if (Status s = budget(line->size() + 1, "reading reply", timeout); !s) return s.error();
  return line;
}

Result<std::string> FaultTransport::read_exact(std::size_t n, Millis timeout) {
  if (Status s = before("reading", timeout); !s) return s.error();
  auto bytes = inner_->read_exact(n, timeout);
  if (!bytes) return bytes;
  if (Status s = budget(bytes->size(), "reading", timeout); !s) return s.error();
  return bytes;
}

void FaultTransport::close() { inner_->close(); }
Status FaultTransport::reconnect(Millis timeout) { return inner_->reconnect(timeout); }
bool FaultTransport::is_open() const { return inner_->is_open(); }
std::string FaultTransport::address() const { return inner_->address(); }

}  // namespace echoline::drivers
