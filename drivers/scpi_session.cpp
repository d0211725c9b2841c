// SCPI message layer over a Transport. See scpi_session.hpp.
#include "drivers/scpi_session.hpp"

#include <chrono>
#include <optional>

#include <fmt/format.h>
#include <spdlog/spdlog.h>

#include "drivers/wire.hpp"

namespace echoline::drivers {

namespace {

using Clock = std::chrono::steady_clock;

long long micros_since(Clock::time_point start) {
  return std::chrono::duration_cast<std::chrono::microseconds>(Clock::now() - start).count();
}

// Strips the carriage return of a CR LF terminated reply.
void strip_cr(std::string& reply) {
  if (!reply.empty() && reply.back() == '\r') reply.pop_back();
}

}  // namespace

ScpiSession::ScpiSession(std::string instrument_name, std::unique_ptr<Transport> transport, SessionOptions options)
    : name_(std::move(instrument_name)), transport_(std::move(transport)), options_(std::move(options)) {}

ScpiSession::~ScpiSession() = default;

const std::string& ScpiSession::name() const { return name_; }
std::string ScpiSession::address() const { return transport_->address(); }
const SessionOptions& ScpiSession::options() const { return options_; }
bool ScpiSession::is_open() const { return transport_->is_open(); }
void ScpiSession::close() { transport_->close(); }

Status ScpiSession::connect() {
  auto start = Clock::now();
  Status s = transport_->open(options_.timeout);
  spdlog::debug("{} ({}): connect {} [{} us]", name_, address(), s ? "ok" : s.error().message, micros_since(start));
  return s;
}

Status ScpiSession::reconnect() {
  auto start = Clock::now();
  Status s = transport_->reconnect(options_.timeout);
  spdlog::debug("{} ({}): reconnect {} [{} us]", name_, address(), s ? "ok" : s.error().message, micros_since(start));
  return s;
}

// Puts the command into a transport error: "<instrument> (<address>): command "X": <rest>".
Error ScpiSession::describe(const Error& error, std::string_view command) const {
  std::string prefix = fmt::format("{} ({}): ", name_, address());
  Error e = error;
  std::string cmd = fmt::format("command {}: ", scpi::quote(command));
  if (e.message.starts_with(prefix)) {
    e.message.insert(prefix.size(), cmd);
  } else {
    e.message = prefix + cmd + e.message;
  }
  return e;
}

Status ScpiSession::write(std::string_view command) {
  auto start = Clock::now();
  std::string wire_text = std::string(command) + options_.write_terminator;
  Status s = transport_->write(wire_text, options_.timeout);
  if (command != wire::kNextError) last_command_ = std::string(command);
  spdlog::trace("{} ({}): > {} [{} us]{}", name_, address(), command, micros_since(start),
                s ? "" : " " + s.error().message);
  if (!s) return describe(s.error(), command);
  return {};
}

Result<std::string> ScpiSession::exchange(std::string_view command, Millis timeout) {
  auto start = Clock::now();
  std::string wire_text = std::string(command) + options_.write_terminator;
  if (command != wire::kNextError) last_command_ = std::string(command);
  if (Status s = transport_->write(wire_text, options_.timeout); !s) {
    spdlog::trace("{} ({}): > {} failed: {}", name_, address(), command, s.error().message);
    return describe(s.error(), command);
  }
  auto reply = transport_->read_until(options_.read_terminator, timeout, options_.max_reply_bytes);
  long long us = micros_since(start);
  if (!reply) {
    spdlog::trace("{} ({}): > {} < failed after {} us: {}", name_, address(), command, us, reply.error().message);
    return describe(reply.error(), command);
  }
  strip_cr(*reply);
  spdlog::trace("{} ({}): > {} < {} [{} us]", name_, address(), command, scpi::quote(*reply, 200), us);
  return reply;
}

Result<std::string> ScpiSession::query(std::string_view command) { return exchange(command, options_.timeout); }

Result<double> ScpiSession::query_number(std::string_view command) {
  auto reply = query(command);
  if (!reply) return reply.error();
  auto value = scpi::parse_number(*reply);
  if (!value) return describe(value.error(), command);
  return value;
}

Result<std::vector<double>> ScpiSession::query_numbers(std::string_view command) {
  auto reply = query(command);
  if (!reply) return reply.error();
  auto values = scpi::parse_number_list(*reply);
  if (!values) return describe(values.error(), command);
  return values;
}

// IEEE 488.2 §8.7.9 / §8.7.10: '#', a digit n, n length digits, the payload, then the terminator;
// or "#0", payload up to NL (with END).
Result<std::string> ScpiSession::read_block_payload(std::string_view command) {
  const Millis t = options_.timeout;
  auto head = transport_->read_exact(2, t);
  if (!head) return describe(head.error(), command);
  if ((*head)[0] != wire::kBlockStart) {
    // Not a block: read the rest of the line so the error shows what the instrument said.
    std::string shown = *head;
    if ((*head)[1] != options_.read_terminator) {
      if (auto rest = transport_->read_until(options_.read_terminator, t, 4096); rest) shown += *rest;
    }
    transport_->close();
    return describe(make_error(ErrorKind::protocol, fmt::format("expected a # block, got {}", scpi::quote(shown))),
                    command);
  }
  if ((*head)[1] == '0') {
    auto payload = transport_->read_until('\n', t, options_.max_reply_bytes);
    if (!payload) return describe(payload.error(), command);
    return payload;
  }
  if ((*head)[1] < '1' || (*head)[1] > '9') {
    transport_->close();
    return describe(make_error(ErrorKind::protocol, fmt::format("block header: expected a digit after '#', got {}",
                                                                scpi::quote(*head))),
                    command);
  }
  std::size_t digits = static_cast<std::size_t>((*head)[1] - '0');
  auto length_text = transport_->read_exact(digits, t);
  if (!length_text) return describe(length_text.error(), command);
  auto header = scpi::parse_block_header(*head + *length_text);
  if (!header) {
    transport_->close();
    return describe(header.error(), command);
  }
  if (header->payload_bytes > options_.max_reply_bytes) {
    transport_->close();
    return describe(make_error(ErrorKind::protocol, fmt::format("block of {} bytes exceeds the {} byte limit",
                                                                header->payload_bytes, options_.max_reply_bytes)),
                    command);
  }
  auto payload = transport_->read_exact(header->payload_bytes, t);
  if (!payload) return describe(payload.error(), command);
  auto tail = transport_->read_until(options_.read_terminator, t, 16);
  if (!tail) return describe(tail.error(), command);
  strip_cr(*tail);
  if (!tail->empty()) {
    transport_->close();
    return describe(make_error(ErrorKind::protocol,
                               fmt::format("{} unexpected bytes after a {} byte block: {}", tail->size(),
                                           header->payload_bytes, scpi::quote(*tail))),
                    command);
  }
  return payload;
}

Result<std::string> ScpiSession::query_block(std::string_view command) {
  auto start = Clock::now();
  if (Status s = write(command); !s) return s.error();
  auto payload = read_block_payload(command);
  spdlog::trace("{} ({}): > {} < {} [{} us]", name_, address(), command,
                payload ? fmt::format("block of {} bytes", payload->size()) : payload.error().message,
                micros_since(start));
  return payload;
}

Result<std::vector<double>> ScpiSession::query_real_block(std::string_view command, int bits, scpi::ByteOrder order) {
  auto payload = query_block(command);
  if (!payload) return payload.error();
  auto values = scpi::decode_real(*payload, bits, order);
  if (!values) return describe(values.error(), command);
  return values;
}

Result<scpi::Identity> ScpiSession::identify() {
  auto reply = query(wire::kIdentify);
  if (!reply) return reply.error();
  auto id = scpi::parse_identity(*reply);
  if (!id) return describe(id.error(), wire::kIdentify);
  return id;
}

Status ScpiSession::wait_complete() { return wait_complete_after({}); }

Status ScpiSession::wait_complete_after(std::string_view commands) {
  // IEEE 488.2-1992 7.4.1: program message units in one message are separated by ';'; a common
  // command (*OPC?) does not change the SCPI header path (SCPI-1999 Vol 1 6.2.5).
  const std::string message = commands.empty() ? std::string(wire::kOperationCompleteQuery)
                                               : fmt::format("{};{}", commands, wire::kOperationCompleteQuery);
  auto reply = exchange(message, options_.opc_timeout);
  if (!reply) return reply.error();
  auto value = scpi::parse_number(*reply);
  if (!value || *value != 1.0) {
    return describe(make_error(ErrorKind::protocol, fmt::format("expected \"1\", got {}", scpi::quote(*reply))), message);
  }
  return {};
}

Status ScpiSession::drain_errors() {
  std::string preceding = last_command_;
  std::optional<scpi::InstrumentError> first;
  int more = 0;
  for (int i = 0; i < wire::kMaxErrorReads; ++i) {
    auto reply = query(wire::kNextError);
    if (!reply) return reply.error();
    auto entry = scpi::parse_error_reply(*reply);
    if (!entry) return describe(entry.error(), wire::kNextError);
    if (entry->code == 0) {
      if (!first) return {};
      Error e = make_error(ErrorKind::instrument,
                           fmt::format("{} ({}): after command {}: instrument error {}, {}{}", name_, address(),
                                       scpi::quote(preceding), first->code, scpi::quote(first->message, 200),
                                       more > 0 ? fmt::format(" (and {} more in the queue)", more) : ""));
      e.instrument_code = first->code;
      return e;
    }
    if (!first) first = *entry;
    else ++more;
  }
  Error e = make_error(ErrorKind::instrument,
                       fmt::format("{} ({}): after command {}: error queue still not empty after {} reads; first "
                                   "error {}, {}",
                                   name_, address(), scpi::quote(preceding), wire::kMaxErrorReads,
                                   first ? first->code : 0, first ? scpi::quote(first->message) : "\"\""));
  e.instrument_code = first ? first->code : 0;
  return e;
}

Status ScpiSession::clear() { return write(wire::kClearStatus); }
Status ScpiSession::reset() { return write(wire::kReset); }

}  // namespace echoline::drivers
