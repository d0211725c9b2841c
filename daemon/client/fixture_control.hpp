// SIMULATOR ONLY: the console's hand on echoline-sim's fixture control port (JSON lines), used
// with `echoline station --sim-fixture` in demos and CI to connect the scanned unit, the prompted
// standard or the unit behind the offset line, as an operator does by hand. One user thread at a time; owns its socket.
#pragma once

#include <memory>
#include <string>
#include <string_view>

#include "daemon/client/line_connection.hpp"
#include "drivers/result.hpp"

namespace echoline::client {

class FixtureControl {
 public:
  // `address`: "tcp://host:port" as echoline-sim prints for role=control.
  explicit FixtureControl(std::string address) : address_(std::move(address)) {}
  FixtureControl(const FixtureControl&) = delete;
  FixtureControl& operator=(const FixtureControl&) = delete;

  Status connect_unit(std::string_view serial);        // {"cmd":"connect","unit":...}
  Status connect_unit_via_line(std::string_view serial);   // the same behind the kit's offset line
  Status connect_standard(std::string_view standard);  // {"cmd":"connect","standard":...}
  const std::string& address() const { return address_; }

 private:
  Status request(const std::string& line);
  std::string address_;
  std::unique_ptr<LineConnection> connection_;
};

}  // namespace echoline::client
