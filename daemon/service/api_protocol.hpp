// The JSON-lines wire format of the daemon's API (see API.md): request parsing and the
// reply / event lines. Pure functions, no I/O, no Asio; safe from any thread. The parser
// never throws and never trusts its input: every bad line becomes a RequestError.
#pragma once

#include <cstddef>
#include <string>
#include <string_view>
#include <variant>

#include <nlohmann/json.hpp>

namespace echoline::service {

inline constexpr int kApiVersion = 1;
inline constexpr std::size_t kMaxLineBytes = 64 * 1024;   // including the '\n'

// One parsed request. `id` is a string or an integer; `args` is always an object.
struct Request {
  nlohmann::json id;
  std::string call;
  nlohmann::json args = nlohmann::json::object();
};

// Why a line was refused. `id` is null when the line did not yield one.
struct RequestError {
  nlohmann::json id;
  std::string code;      // API.md error codes: bad_request, unsupported_version, unknown_call, too_large
  std::string message;
};

// Parses one line (without its '\n'). Checks the envelope, the call name and the argument
// types of that call (API.md); a line longer than kMaxLineBytes is too_large.
std::variant<Request, RequestError> parse_request(std::string_view line);

// True for the call names API.md lists.
bool is_known_call(std::string_view call);

// Reply and event lines, each ending in '\n'. Invalid UTF-8 in strings is replaced, never thrown.
std::string reply_ok(const nlohmann::json& id, nlohmann::json result);
std::string reply_error(const nlohmann::json& id, std::string_view code, std::string_view message);
std::string event_line(const nlohmann::json& id, std::string_view event, nlohmann::json fields);

// JSON text that never throws on bad UTF-8 (replaced by U+FFFD).
std::string dump_safe(const nlohmann::json& value);

}  // namespace echoline::service
