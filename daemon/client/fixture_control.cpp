#include "daemon/client/fixture_control.hpp"

#include <fmt/format.h>
#include <nlohmann/json.hpp>

namespace echoline::client {

using nlohmann::json;

Status FixtureControl::request(const std::string& line) {
  // One retry with a fresh connection: the simulator may have been restarted.
  for (int attempt = 0; attempt < 2; ++attempt) {
    if (!connection_) {
      auto c = LineConnection::connect_address(address_, Millis{3000});
      if (!c) return c.error().with_context("simulator fixture");
      connection_ = std::move(c.value());
    }
    Status sent = connection_->write_line(line);
    Result<std::string> reply = sent ? connection_->read_line(Millis{5000}) : Result<std::string>(sent.error());
    if (!reply) {
      connection_.reset();
      if (attempt == 0 && reply.error().kind == ErrorKind::closed) continue;
      return reply.error().with_context("simulator fixture");
    }
    json j = json::parse(*reply, nullptr, false);
    if (j.is_discarded() || !j.is_object()) {
      return make_error(ErrorKind::protocol, fmt::format("simulator fixture {}: reply is not JSON: {}", address_, *reply));
    }
    if (!j.value("ok", false)) {
      return make_error(ErrorKind::invalid_argument,
                        fmt::format("simulator fixture {}: {}", address_, j.value("error", std::string("refused"))));
    }
    return Status::success();
  }
  return make_error(ErrorKind::closed, fmt::format("simulator fixture {}: connection lost", address_));
}

Status FixtureControl::connect_unit(std::string_view serial) {
  return request(json{{"cmd", "connect"}, {"unit", serial}}.dump());
}

Status FixtureControl::connect_unit_via_line(std::string_view serial) {
  return request(json{{"cmd", "connect"}, {"unit", serial}, {"via", "offset-line"}}.dump());
}

Status FixtureControl::connect_standard(std::string_view standard) {
  return request(json{{"cmd", "connect"}, {"standard", standard}}.dump());
}

}  // namespace echoline::client
