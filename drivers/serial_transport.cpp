// Serial transport: address parsing, pty detection, buffered reads with deadlines over two back
// ends (libserialport for serial ports, termios for pseudo-terminals). See serial_transport.hpp.
#include "drivers/serial_transport.hpp"

#include <fcntl.h>
#include <poll.h>
#include <sys/ioctl.h>
#include <sys/stat.h>
#include <sys/sysmacros.h>
#include <termios.h>
#include <unistd.h>

#include <cerrno>
#include <charconv>
#include <chrono>
#include <climits>
#include <cstdlib>
#include <cstring>

#include <fmt/format.h>
#include <libserialport.h>

#include "drivers/scpi_codec.hpp"
#include "drivers/wire.hpp"

namespace echoline::drivers {

// ---------------------------------------------------------------------------------------------
// Address parsing

Result<SerialSettings> parse_serial_address(std::string_view address) {
  auto bad = [&](std::string_view why) {
    return make_error(ErrorKind::config, fmt::format("instrument address \"{}\": {}", address, why));
  };
  if (!address.starts_with(wire::kSerialScheme)) return bad("does not start with serial:");
  std::string_view rest = address.substr(wire::kSerialScheme.size());
  std::size_t q = rest.find('?');
  SerialSettings s;
  s.device = std::string(rest.substr(0, q));
  if (s.device.empty()) return bad("no device (expected \"serial:/dev/ttyUSB0?baud=9600\")");
  if (s.device.front() != '/') return bad(fmt::format("device \"{}\" is not an absolute path", s.device));
  if (q == std::string_view::npos) return s;
  std::string_view query = rest.substr(q + 1);
  while (!query.empty()) {
    std::size_t amp = query.find('&');
    std::string_view item = query.substr(0, amp);
    query = amp == std::string_view::npos ? std::string_view{} : query.substr(amp + 1);
    std::size_t eq = item.find('=');
    if (eq == std::string_view::npos) return bad(fmt::format("option \"{}\" is not key=value", item));
    std::string_view key = item.substr(0, eq);
    std::string_view value = item.substr(eq + 1);
    auto integer = [&](int lo, int hi, int& out) -> bool {
      auto [end, ec] = std::from_chars(value.data(), value.data() + value.size(), out);
      return !value.empty() && ec == std::errc{} && end == value.data() + value.size() && out >= lo && out <= hi;
    };
    if (key == "baud") {
      if (!integer(50, 4000000, s.baud)) return bad(fmt::format("baud \"{}\" is not a rate in 50..4000000", value));
    } else if (key == "data") {
      if (!integer(5, 8, s.data_bits)) return bad(fmt::format("data \"{}\" is not 5, 6, 7 or 8 bits", value));
    } else if (key == "stop") {
      if (!integer(1, 2, s.stop_bits)) return bad(fmt::format("stop \"{}\" is not 1 or 2", value));
    } else if (key == "parity") {
      if (value == "none") s.parity = SerialParity::none;
      else if (value == "even") s.parity = SerialParity::even;
      else if (value == "odd") s.parity = SerialParity::odd;
      else return bad(fmt::format("parity \"{}\" is not none, even or odd", value));
    } else if (key == "flow") {
      if (value == "none") s.flow = SerialFlow::none;
      else if (value == "rtscts") s.flow = SerialFlow::rtscts;
      else if (value == "xonxoff") s.flow = SerialFlow::xonxoff;
      else return bad(fmt::format("flow \"{}\" is not none, rtscts or xonxoff", value));
    } else if (key == "driver") {
      if (value == "auto") s.driver = SerialDriver::automatic;
      else if (value == "libserialport") s.driver = SerialDriver::libserialport;
      else if (value == "termios") s.driver = SerialDriver::termios;
      else return bad(fmt::format("driver \"{}\" is not auto, libserialport or termios", value));
    } else {
      return bad(fmt::format("unknown option \"{}\" (known: baud, data, parity, stop, flow, driver)", key));
    }
  }
  return s;
}

bool is_pseudo_terminal(const std::string& device) {
  char resolved[PATH_MAX];
  if (::realpath(device.c_str(), resolved) == nullptr) return false;
  struct stat st {};
  if (::stat(resolved, &st) != 0 || !S_ISCHR(st.st_mode)) return false;
  unsigned major_number = major(st.st_rdev);
  return major_number >= wire::kPtySlaveMajorFirst && major_number <= wire::kPtySlaveMajorLast;
}

namespace {

using Clock = std::chrono::steady_clock;

std::string errno_text(int err) { return fmt::format("{} (errno {})", std::strerror(err), err); }

// What a back end can do: open/configure, read what is there (waiting up to a deadline), write.
// Errors carry only "<what happened>"; SerialTransport adds instrument, address and activity.
class PortBackend {
 public:
  virtual ~PortBackend() = default;
  virtual Status open(const SerialSettings& s) = 0;
  // Reads 1..n bytes, or 0 when `wait` passed with nothing to read.
  virtual Result<std::size_t> read_some(char* buf, std::size_t n, Millis wait) = 0;
  // Writes up to n bytes, waiting at most `wait`; returns how many went out.
  virtual Result<std::size_t> write_some(const char* buf, std::size_t n, Millis wait) = 0;
  virtual void close() = 0;
  virtual bool is_open() const = 0;
  virtual std::string_view name() const = 0;
};

// ---------------------------------------------------------------------------------------------
// termios back end (pseudo-terminals; also works for real ports)

speed_t to_speed(int baud) {
  switch (baud) {
    case 50: return B50; case 75: return B75; case 110: return B110; case 134: return B134;
    case 150: return B150; case 200: return B200; case 300: return B300; case 600: return B600;
    case 1200: return B1200; case 1800: return B1800; case 2400: return B2400; case 4800: return B4800;
    case 9600: return B9600; case 19200: return B19200; case 38400: return B38400; case 57600: return B57600;
    case 115200: return B115200; case 230400: return B230400; case 460800: return B460800;
    case 500000: return B500000; case 576000: return B576000; case 921600: return B921600;
    case 1000000: return B1000000; case 1152000: return B1152000; case 1500000: return B1500000;
    case 2000000: return B2000000; case 2500000: return B2500000; case 3000000: return B3000000;
    case 3500000: return B3500000; case 4000000: return B4000000;
    default: return B0;
  }
}

// Character size, parity, stop bits and flow control from the settings.
void set_framing(termios& t, const SerialSettings& s) {
  t.c_cflag &= ~static_cast<tcflag_t>(CSIZE | PARENB | PARODD | CSTOPB | CRTSCTS);
  t.c_cflag |= s.data_bits == 5 ? CS5 : s.data_bits == 6 ? CS6 : s.data_bits == 7 ? CS7 : CS8;
  if (s.parity != SerialParity::none) t.c_cflag |= PARENB;
  if (s.parity == SerialParity::odd) t.c_cflag |= PARODD;
  if (s.stop_bits == 2) t.c_cflag |= CSTOPB;
  t.c_iflag &= ~static_cast<tcflag_t>(IXON | IXOFF | IXANY);
  if (s.flow == SerialFlow::rtscts) t.c_cflag |= CRTSCTS;
  if (s.flow == SerialFlow::xonxoff) t.c_iflag |= IXON | IXOFF;
}

class TermiosBackend final : public PortBackend {
 public:
  ~TermiosBackend() override { close(); }

  Status open(const SerialSettings& s) override {
    speed_t speed = to_speed(s.baud);
    if (speed == B0) {
      return make_error(ErrorKind::config, fmt::format("baud {} is not a standard rate (termios)", s.baud));
    }
    fd_ = ::open(s.device.c_str(), O_RDWR | O_NOCTTY | O_NONBLOCK | O_CLOEXEC);
    if (fd_ < 0) return fail_errno(ErrorKind::io, "open");
    if (::ioctl(fd_, TIOCEXCL) != 0) return fail_errno(ErrorKind::io, "TIOCEXCL (exclusive access)");
    termios t{};
    if (::tcgetattr(fd_, &t) != 0) return fail_errno(ErrorKind::io, "tcgetattr");
    ::cfmakeraw(&t);
    t.c_cflag |= CLOCAL | CREAD;
    set_framing(t, s);
    t.c_cc[VMIN] = 0;
    t.c_cc[VTIME] = 0;
    if (::cfsetispeed(&t, speed) != 0 || ::cfsetospeed(&t, speed) != 0) return fail_errno(ErrorKind::io, "cfsetspeed");
    if (::tcsetattr(fd_, TCSANOW, &t) != 0) return fail_errno(ErrorKind::io, "tcsetattr");
    ::tcflush(fd_, TCIOFLUSH);
    return {};
  }

  Result<std::size_t> read_some(char* buf, std::size_t n, Millis wait) override {
    if (auto ready = wait_for(POLLIN, wait); !ready) return ready.error();
    else if (!*ready) return std::size_t{0};
    ssize_t got = ::read(fd_, buf, n);
    if (got > 0) return static_cast<std::size_t>(got);
    if (got == 0 || errno == EIO) return make_error(ErrorKind::closed, "the other end of the line closed (hang-up)");
    if (errno == EAGAIN || errno == EINTR) return std::size_t{0};
    return make_error(ErrorKind::io, errno_text(errno));
  }

  Result<std::size_t> write_some(const char* buf, std::size_t n, Millis wait) override {
    if (auto ready = wait_for(POLLOUT, wait); !ready) return ready.error();
    else if (!*ready) return std::size_t{0};
    ssize_t put = ::write(fd_, buf, n);
    if (put >= 0) return static_cast<std::size_t>(put);
    if (errno == EAGAIN || errno == EINTR) return std::size_t{0};
    if (errno == EIO) return make_error(ErrorKind::closed, "the other end of the line closed (hang-up)");
    return make_error(ErrorKind::io, errno_text(errno));
  }

  void close() override {
    if (fd_ >= 0) ::close(fd_);
    fd_ = -1;
  }
  bool is_open() const override { return fd_ >= 0; }
  std::string_view name() const override { return "termios"; }

 private:
  Result<bool> wait_for(short events, Millis wait) {
    pollfd p{fd_, events, 0};
    int r = ::poll(&p, 1, static_cast<int>(wait.count()));
    if (r < 0) return errno == EINTR ? Result<bool>(false) : Result<bool>(make_error(ErrorKind::io, errno_text(errno)));
    if (r == 0) return false;
    if ((p.revents & events) != 0) return true;
    if ((p.revents & (POLLHUP | POLLERR)) != 0) {
      return make_error(ErrorKind::closed, "the other end of the line closed (hang-up)");
    }
    return false;
  }

  Error fail_errno(ErrorKind kind, std::string_view call) {
    Error e = make_error(kind, fmt::format("{}: {}", call, errno_text(errno)));
    close();
    return e;
  }

  int fd_ = -1;
};

// ---------------------------------------------------------------------------------------------
// libserialport back end (real serial ports)

class LibserialportBackend final : public PortBackend {
 public:
  ~LibserialportBackend() override { close(); }

  Status open(const SerialSettings& s) override {
    if (sp_get_port_by_name(s.device.c_str(), &port_) != SP_OK) {
      port_ = nullptr;
      return make_error(ErrorKind::io,
                        fmt::format("libserialport does not know the port: {} (pseudo-terminals are opened "
                                    "with driver=termios or driver=auto)",
                                    last_error()));
    }
    if (sp_open(port_, SP_MODE_READ_WRITE) != SP_OK) return fail("sp_open");
    opened_ = true;
    int fd = -1;
    if (sp_get_port_handle(port_, &fd) != SP_OK) return fail("sp_get_port_handle");
    if (::ioctl(fd, TIOCEXCL) != 0) {   // sp_open does not take exclusive access itself
      Error e = make_error(ErrorKind::io, fmt::format("TIOCEXCL (exclusive access): {}", errno_text(errno)));
      close();
      return e;
    }
    sp_port_config* config = nullptr;
    if (sp_new_config(&config) != SP_OK) return fail("sp_new_config");
    bool ok = sp_get_config(port_, config) == SP_OK && sp_set_config_baudrate(config, s.baud) == SP_OK &&
              sp_set_config_bits(config, s.data_bits) == SP_OK &&
              sp_set_config_parity(config, s.parity == SerialParity::none   ? SP_PARITY_NONE
                                           : s.parity == SerialParity::even ? SP_PARITY_EVEN
                                                                            : SP_PARITY_ODD) == SP_OK &&
              sp_set_config_stopbits(config, s.stop_bits) == SP_OK &&
              sp_set_config_flowcontrol(config, s.flow == SerialFlow::none     ? SP_FLOWCONTROL_NONE
                                                : s.flow == SerialFlow::rtscts ? SP_FLOWCONTROL_RTSCTS
                                                                               : SP_FLOWCONTROL_XONXOFF) == SP_OK;
    if (ok && s.flow != SerialFlow::rtscts) ok = sp_set_config_rts(config, SP_RTS_ON) == SP_OK;
    if (ok) ok = sp_set_config_dtr(config, SP_DTR_ON) == SP_OK;
    if (ok) ok = sp_set_config(port_, config) == SP_OK;
    sp_free_config(config);
    if (!ok) return fail(fmt::format("configuring {} baud, {} data bits, {} stop bits", s.baud, s.data_bits, s.stop_bits));
    // libserialport 0.1.1 as shipped by Debian accepts SP_FLOWCONTROL_RTSCTS but never sets CRTSCTS
    // in the termios flags it writes (observed through the test seam), so apply it here.
    if (Status f = apply_hardware_flow(fd, s); !f) {
      close();
      return f;
    }
    sp_flush(port_, SP_BUF_BOTH);
    return {};
  }

  Result<std::size_t> read_some(char* buf, std::size_t n, Millis wait) override {
    // libserialport treats a timeout of 0 as "wait forever": wait at least 1 ms.
    auto ms = static_cast<unsigned>(std::max<long long>(1, wait.count()));
    sp_return r = sp_blocking_read_next(port_, buf, n, ms);
    if (r >= 0) return static_cast<std::size_t>(r);
    return make_error(ErrorKind::io, fmt::format("sp_blocking_read_next: {}", last_error()));
  }

  Result<std::size_t> write_some(const char* buf, std::size_t n, Millis wait) override {
    auto ms = static_cast<unsigned>(std::max<long long>(1, wait.count()));
    sp_return r = sp_blocking_write(port_, buf, n, ms);
    if (r >= 0) return static_cast<std::size_t>(r);
    return make_error(ErrorKind::io, fmt::format("sp_blocking_write: {}", last_error()));
  }

  void close() override {
    if (port_ != nullptr) {
      if (opened_) sp_close(port_);
      sp_free_port(port_);
    }
    port_ = nullptr;
    opened_ = false;
  }
  bool is_open() const override { return opened_; }
  std::string_view name() const override { return "libserialport"; }

 private:
  static std::string last_error() {
    char* text = sp_last_error_message();
    std::string out = text != nullptr ? text : "unknown error";
    sp_free_error_message(text);
    int err = sp_last_error_code();
    if (err != 0) out += fmt::format(" (errno {})", err);
    return out;
  }

  // Re-asserts the framing with CRTSCTS as asked, when the flag is not already right.
  static Status apply_hardware_flow(int fd, const SerialSettings& s) {
    termios t{};
    if (::tcgetattr(fd, &t) != 0) return make_error(ErrorKind::io, fmt::format("tcgetattr: {}", errno_text(errno)));
    if (((t.c_cflag & CRTSCTS) != 0) == (s.flow == SerialFlow::rtscts)) return {};
    set_framing(t, s);
    if (::tcsetattr(fd, TCSANOW, &t) != 0) {
      return make_error(ErrorKind::io, fmt::format("tcsetattr (RTS/CTS flow control): {}", errno_text(errno)));
    }
    return {};
  }

  Error fail(std::string_view call) {
    Error e = make_error(ErrorKind::io, fmt::format("{}: {}", call, last_error()));
    close();
    return e;
  }

  sp_port* port_ = nullptr;
  bool opened_ = false;
};

// ---------------------------------------------------------------------------------------------
// The transport: buffering and deadlines, the same for both back ends

class SerialTransport final : public Transport {
 public:
  SerialTransport(SerialSettings settings, std::string address, std::string name)
      : settings_(std::move(settings)), address_(std::move(address)), name_(std::move(name)) {}
  ~SerialTransport() override { close(); }

  Status open(Millis /*timeout: opening a local device does not block*/) override {
    close();
    bool use_termios = settings_.driver == SerialDriver::termios ||
                       (settings_.driver == SerialDriver::automatic && is_pseudo_terminal(settings_.device));
    if (use_termios) backend_ = std::make_unique<TermiosBackend>();
    else backend_ = std::make_unique<LibserialportBackend>();
    if (Status s = backend_->open(settings_); !s) {
      Error e = wrap(s.error(), fmt::format("opening {} ({})", settings_.device, backend_->name()));
      backend_.reset();
      return e;
    }
    return {};
  }

  Status write(std::string_view bytes, Millis timeout) override {
    if (!is_open()) return not_open("writing");
    auto deadline = Clock::now() + timeout;
    std::size_t sent = 0;
    while (sent < bytes.size()) {
      auto left = remaining(deadline);
      if (left.count() <= 0) {
        close();
        return fail(ErrorKind::timeout, "writing",
                    fmt::format("{} of {} bytes sent within {} ms; port closed", sent, bytes.size(), timeout.count()));
      }
      auto put = backend_->write_some(bytes.data() + sent, bytes.size() - sent, left);
      if (!put) {
        close();
        return wrap(put.error(), "writing");
      }
      sent += *put;
    }
    return {};
  }

  Result<std::string> read_until(char terminator, Millis timeout, std::size_t max_bytes) override {
    if (!is_open()) return not_open("reading reply");
    auto deadline = Clock::now() + timeout;
    std::size_t scanned = 0;
    for (;;) {
      std::size_t found = buffer_.find(terminator, scanned);
      if (found != std::string::npos) {
        std::string line = buffer_.substr(0, found);
        buffer_.erase(0, found + 1);
        return line;
      }
      scanned = buffer_.size();
      if (buffer_.size() > max_bytes) {
        close();
        return fail(ErrorKind::protocol, "reading reply",
                    fmt::format("no terminator within {} bytes; port closed", max_bytes));
      }
      if (Status s = fill(deadline, timeout, "reading reply"); !s) return s.error();
    }
  }

  Result<std::string> read_exact(std::size_t n, Millis timeout) override {
    if (!is_open()) return not_open("reading");
    auto deadline = Clock::now() + timeout;
    while (buffer_.size() < n) {
      if (Status s = fill(deadline, timeout, fmt::format("reading {} bytes", n)); !s) return s.error();
    }
    std::string out = buffer_.substr(0, n);
    buffer_.erase(0, n);
    return out;
  }

  void close() override {
    if (backend_) backend_->close();
    backend_.reset();
    buffer_.clear();
  }

  Status reconnect(Millis timeout) override {
    close();
    return open(timeout);
  }

  bool is_open() const override { return backend_ != nullptr && backend_->is_open(); }
  std::string address() const override { return address_; }

 private:
  static Millis remaining(Clock::time_point deadline) {
    return std::chrono::duration_cast<Millis>(deadline - Clock::now());
  }

  // Appends what arrives before the deadline to buffer_; on timeout or error closes the port.
  Status fill(Clock::time_point deadline, Millis timeout, std::string_view doing) {
    char chunk[4096];
    for (;;) {
      auto left = remaining(deadline);
      if (left.count() <= 0) {
        // buffer_ holds only bytes read (chunk is appended by the count read_some returned).
        const std::string arrived =
            buffer_.empty() ? std::string("nothing arrived")
                            : fmt::format("{} bytes arrived: {}", buffer_.size(), scpi::quote(buffer_, wire::kPartialReplyQuoteLimit));
        close();
        return fail(ErrorKind::timeout, doing,
                    fmt::format("nothing complete within {} ms ({}); port closed", timeout.count(), arrived));
      }
      auto got = backend_->read_some(chunk, sizeof chunk, left);
      if (!got) {
        close();
        return wrap(got.error(), doing);
      }
      if (*got > 0) {
        buffer_.append(chunk, *got);
        return {};
      }
    }
  }

  Error fail(ErrorKind kind, std::string_view doing, std::string_view what) const {
    return make_error(kind, fmt::format("{} ({}): {}: {}", name_, address_, doing, what));
  }
  Error wrap(const Error& e, std::string_view doing) const { return fail(e.kind, doing, e.message); }
  Error not_open(std::string_view doing) const {
    return fail(ErrorKind::closed, doing, "port not open (closed after an earlier error; reconnect first)");
  }

  SerialSettings settings_;
  std::string address_;
  std::string name_;
  std::unique_ptr<PortBackend> backend_;
  std::string buffer_;   // bytes received and not yet returned
};

}  // namespace

std::unique_ptr<Transport> make_serial_transport(SerialSettings settings, std::string address,
                                                 std::string instrument_name) {
  return std::make_unique<SerialTransport>(std::move(settings), std::move(address), std::move(instrument_name));
}

}  // namespace echoline::drivers
