// Serial transport: RS-232 / USB serial ports through libserialport, pseudo-terminals through
// plain termios. Owns one port (exclusive: TIOCEXCL). Threading: one user thread at a time;
// not copyable.
//
// Why two back ends: libserialport 0.1.1 cannot open a pty (it wants a /sys/class/tty/<name>
// entry, which /dev/pts/N lacks, and sp_open fails on TIOCMGET, which the pty driver answers
// with ENOTTY). Ptys are real in production: the simulator exposes them, and serial-over-network
// bridges present one. So with driver=auto (the default) a device that resolves (through
// symlinks) to a char device of major 136..143 (pty slave) is opened with termios; anything
// else goes through libserialport. driver=libserialport or driver=termios forces one.
// A pty stores the baud rate and framing but does not emulate them (no real line timing).
#pragma once

#include <memory>
#include <string>
#include <string_view>

#include "drivers/transport.hpp"

namespace echoline::drivers {

enum class SerialParity { none, even, odd };
enum class SerialFlow { none, rtscts, xonxoff };
enum class SerialDriver { automatic, libserialport, termios };

struct SerialSettings {
  std::string device;                     // "/dev/ttyUSB0", "/dev/pts/7", or a symlink to one
  int baud = 9600;                        // bits per second
  int data_bits = 8;                      // 5..8
  SerialParity parity = SerialParity::none;
  int stop_bits = 1;                      // 1 or 2
  SerialFlow flow = SerialFlow::none;
  SerialDriver driver = SerialDriver::automatic;   // see the file comment
};

// Parses "serial:<device>[?baud=9600&data=8&parity=none|even|odd&stop=1|2&flow=none|rtscts|xonxoff
// &driver=auto|libserialport|termios]". Unknown keys and bad values are ErrorKind::config naming
// the address and the key.
Result<SerialSettings> parse_serial_address(std::string_view address);

// True when `device` resolves to a pseudo-terminal slave (char major 136..143).
bool is_pseudo_terminal(const std::string& device);

// Does not open the port.
std::unique_ptr<Transport> make_serial_transport(SerialSettings settings, std::string address,
                                                 std::string instrument_name);

}  // namespace echoline::drivers
