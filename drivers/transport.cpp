// make_transport: picks the transport for an address. See transport.hpp.
#include "drivers/transport.hpp"

#include <fmt/format.h>

#include "drivers/serial_transport.hpp"
#include "drivers/tcp_transport.hpp"
#include "drivers/wire.hpp"

namespace echoline::drivers {

Result<std::unique_ptr<Transport>> make_transport(std::string_view address, std::string instrument_name) {
  if (address.starts_with(wire::kTcpScheme)) {
    auto endpoint = parse_tcp_address(address);
    if (!endpoint) return endpoint.error().with_context(instrument_name);
    return make_tcp_transport(std::move(*endpoint), std::string(address), std::move(instrument_name));
  }
  if (address.starts_with(wire::kSerialScheme)) {
    auto settings = parse_serial_address(address);
    if (!settings) return settings.error().with_context(instrument_name);
    return make_serial_transport(std::move(*settings), std::string(address), std::move(instrument_name));
  }
  return make_error(ErrorKind::config,
                    fmt::format("{}: instrument address \"{}\": unknown scheme (expected \"tcp://host:port\" or "
                                "\"serial:<device>?baud=...\")",
                                instrument_name, address));
}

}  // namespace echoline::drivers
