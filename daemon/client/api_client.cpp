#include "daemon/client/api_client.hpp"

#include <fmt/format.h>

#include "daemon/client/exit_codes.hpp"

namespace echoline::client {

using nlohmann::json;

int exit_code_for_api_error(std::string_view code) {
  if (code == "instrument" || code == "unsafe") return kExitInstrument;
  if (code == "storage") return kExitStorage;
  if (code == "shutting_down") return kExitUnreachable;
  if (code == "bad_request" || code == "config" || code == "unauthorized" || code == "forbidden" ||
      code == "unknown_call" || code == "unsupported_version" || code == "invalid_serial" || code == "too_large") {
    return kExitUsage;
  }
  return kExitNegative;
}

ApiReply to_reply(const json& message) {
  ApiReply r;
  r.ok = message.value("ok", false);
  if (r.ok) {
    r.result = message.contains("result") ? message["result"] : json::object();
  } else if (message.contains("error") && message["error"].is_object()) {
    r.code = message["error"].value("code", "internal");
    r.message = message["error"].value("message", "");
  } else {
    r.code = "internal";
    r.message = "reply without ok or error";
  }
  return r;
}

ApiClient::ApiClient(std::unique_ptr<LineConnection> connection)
    : connection_(std::move(connection)), address_(connection_->address()) {}

Status ApiClient::reconnect(Millis timeout) {
  pending_.clear();
  connection_.reset();
  auto link = LineConnection::connect_address(address_, timeout);
  if (!link) return link.error();
  connection_ = std::move(link.value());
  if (!said_hello_) return Status::success();
  const std::string role = hello_role_, token = hello_token_, client = hello_client_;   // hello() rewrites them
  auto reply = hello(role, token, client);
  if (!reply) {
    connection_.reset();
    return reply.error();
  }
  if (!reply->ok) {
    connection_.reset();
    return make_error(reply->code == "shutting_down" ? ErrorKind::closed : ErrorKind::config,
                      fmt::format("daemon {}: hello refused ({}): {}", address_, reply->code, reply->message));
  }
  return Status::success();
}

Result<long> ApiClient::send(std::string_view name, const json& args) {
  const long id = next_id_++;
  if (!connection_) return make_error(ErrorKind::closed, fmt::format("daemon {}: {}: not connected", address_, name));
  json request = {{"v", 1}, {"id", id}, {"call", name}, {"args", args.is_null() ? json::object() : args}};
  if (Status s = connection_->write_line(request.dump()); !s) return s.error().with_context(fmt::format("daemon {}", name));
  return id;
}

Result<json> ApiClient::read_message(Millis timeout) {
  if (!connection_) return make_error(ErrorKind::closed, fmt::format("daemon {}: not connected", address_));
  auto line = connection_->read_line(timeout, max_reply_bytes_);
  if (!line) return line.error();
  json j = json::parse(*line, nullptr, false);
  if (j.is_discarded() || !j.is_object()) {
    return make_error(ErrorKind::protocol, fmt::format("{}: the daemon sent a line that is not a JSON object: {}",
                                                       address_, line->substr(0, 200)));
  }
  return j;
}

Result<ApiReply> ApiClient::call(std::string_view name, const json& args, Millis timeout) {
  auto id = send(name, args);
  if (!id) return id.error();
  const auto deadline = std::chrono::steady_clock::now() + timeout;
  for (;;) {
    const auto left = std::chrono::duration_cast<Millis>(deadline - std::chrono::steady_clock::now());
    if (left.count() <= 0) {
      return make_error(ErrorKind::timeout, fmt::format("daemon {}: no reply to {} within {} ms",
                                                        address_, name, timeout.count()));
    }
    auto m = read_message(left);
    if (!m) return m.error().with_context(fmt::format("daemon {}", name));
    const json& j = *m;
    const bool is_reply = j.contains("ok") && !j.contains("event");
    if (is_reply && j.contains("id") && j["id"].is_number_integer() && j["id"].get<long>() == *id) return to_reply(j);
    pending_.push_back(std::move(m.value()));
  }
}

Result<json> ApiClient::next_message(Millis timeout) {
  if (!pending_.empty()) {
    json j = std::move(pending_.front());
    pending_.pop_front();
    return j;
  }
  return read_message(timeout);
}

Result<ApiReply> ApiClient::hello(std::string_view role, std::string_view token, std::string_view client_name) {
  said_hello_ = true;
  hello_role_ = role;
  hello_token_ = token;
  hello_client_ = client_name;
  json args = {{"role", role}, {"client", client_name}};
  if (!token.empty()) args["token"] = token;
  return call("hello", args);
}

}  // namespace echoline::client
