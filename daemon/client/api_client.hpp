// Client side of the daemon's JSON-lines API (daemon/service/API.md, version 1): requests with
// ids, replies matched by id, events queued in arrival order. Transport problems are Error values
// (ErrorKind closed/timeout/io); the daemon's refusals are ordinary replies (ApiReply::ok false).
// After a lost link, reconnect() opens a new connection to the same address and says the same
// hello again. One user thread at a time; owns its connection (copy deleted).
#pragma once

#include <deque>
#include <memory>
#include <string>
#include <string_view>

#include <nlohmann/json.hpp>

#include "daemon/client/line_connection.hpp"
#include "drivers/result.hpp"

namespace echoline::client {

struct ApiReply {
  bool ok = false;
  nlohmann::json result;    // when ok
  std::string code;         // API error code when !ok ("busy", "calibration_due", ...)
  std::string message;      // the daemon's message when !ok
};

class ApiClient {
 public:
  explicit ApiClient(std::unique_ptr<LineConnection> connection);
  ApiClient(const ApiClient&) = delete;
  ApiClient& operator=(const ApiClient&) = delete;

  // Sends a request and waits up to `timeout` for its reply; events and replies to other
  // requests that arrive meanwhile are kept for next_message().
  Result<ApiReply> call(std::string_view name, const nlohmann::json& args, Millis timeout = Millis{30000});
  // Sends a request; returns its id (the reply arrives through next_message()).
  Result<long> send(std::string_view name, const nlohmann::json& args);
  // The next message (reply or event) from the daemon, queued ones first.
  Result<nlohmann::json> next_message(Millis timeout);
  // `hello` with a role and an optional token. A refusal comes back as a reply with !ok.
  Result<ApiReply> hello(std::string_view role, std::string_view token, std::string_view client_name);

  // Drops the current connection (and every queued message), connects again to the same address
  // and repeats the last hello (role, token, client name). Errors: the connect or hello failed
  // (transport kinds), or the daemon refused the hello (closed when it is shutting down, else
  // config; the message has its code and message).
  Status reconnect(Millis timeout);

  // Longest reply line accepted (default 16 MiB). Reports and exports come back inside the reply,
  // so the commands that fetch them raise it.
  void set_max_reply_bytes(std::size_t bytes) { max_reply_bytes_ = bytes; }

  const std::string& address() const { return address_; }
  // The id of the last request sent (to match the events of a long call).
  long last_id() const { return next_id_ - 1; }

 private:
  Result<nlohmann::json> read_message(Millis timeout);
  std::unique_ptr<LineConnection> connection_;
  std::string address_;
  std::deque<nlohmann::json> pending_;
  bool said_hello_ = false;
  std::string hello_role_, hello_token_, hello_client_;
  long next_id_ = 1;
  std::size_t max_reply_bytes_ = 16u << 20;
};

// Reads the reply fields of a message (ok/result/error) into an ApiReply.
ApiReply to_reply(const nlohmann::json& message);

}  // namespace echoline::client
