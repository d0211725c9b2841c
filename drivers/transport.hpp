// Transport: moves bytes to and from one instrument; knows nothing of SCPI.
// Owns the link (socket, serial port, pty). Threading: one user thread at a time; not copyable.
// Implementations: tcp_transport (Asio), serial_transport (libserialport; termios for ptys),
// memory_transport (scripted peer for unit tests), fault_transport (fault-injecting wrapper).
#pragma once

#include <chrono>
#include <cstddef>
#include <memory>
#include <string>
#include <string_view>

#include "drivers/result.hpp"

namespace echoline::drivers {

using Millis = std::chrono::milliseconds;

// Moves bytes; knows nothing of SCPI. One user thread at a time.
// Every error message reads "<instrument> (<address>): <doing what>: <what happened>".
// After a read timeout the transport closes itself (a late reply must not be taken as the
// next answer); the next call reports ErrorKind::closed until reconnect().
class Transport {
 public:
  Transport() = default;
  Transport(const Transport&) = delete;
  Transport& operator=(const Transport&) = delete;
  virtual ~Transport() = default;

  // Connects / opens the port within `timeout`.
  virtual Status open(Millis timeout) = 0;
  // Sends all bytes, in one write where possible. REQUIRES: is_open().
  virtual Status write(std::string_view bytes, Millis timeout) = 0;
  // Reads up to and including `terminator`; returns the bytes WITH the terminator stripped.
  // More than `max_bytes` without a terminator is ErrorKind::protocol.
  virtual Result<std::string> read_until(char terminator, Millis timeout, std::size_t max_bytes) = 0;
  // Reads exactly `n` bytes (reassembling partial reads) within `timeout`.
  virtual Result<std::string> read_exact(std::size_t n, Millis timeout) = 0;
  // Closes the link; also discards buffered input. Safe to call when already closed.
  virtual void close() = 0;
  // close() + open().
  virtual Status reconnect(Millis timeout) = 0;
  virtual bool is_open() const = 0;
  // The address it was made from: "tcp://127.0.0.1:5025", "serial:/dev/ttyUSB0?baud=9600".
  virtual std::string address() const = 0;
};

// address: "tcp://host:port" or
//   "serial:<device>[?baud=9600&data=8&parity=none|even|odd&stop=1|2&flow=none|rtscts|xonxoff]"
// (serial also accepts driver=auto|libserialport|termios; see serial_transport.hpp).
// instrument_name goes into every error message: "<instrument> (<address>): <doing what>: <what happened>".
// Does not open the link; a malformed address is ErrorKind::config naming the address.
Result<std::unique_ptr<Transport>> make_transport(std::string_view address, std::string instrument_name);

}  // namespace echoline::drivers
