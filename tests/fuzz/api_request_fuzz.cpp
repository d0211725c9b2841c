// Fuzz target for the daemon's API request parser and reply writers
// (daemon/service/api_protocol.hpp). The parser promises never to throw and to turn every bad
// line into a RequestError with an API.md error code; the writers promise one JSON line that
// survives invalid UTF-8. Any exception, crash or broken promise is a finding. Single-threaded.
#include <algorithm>
#include <cstdint>
#include <set>
#include <string>

#include <nlohmann/json.hpp>

#include "daemon/service/api_protocol.hpp"
#include "tests/fuzz/fuzz_check.hpp"

namespace service = echoline::service;
using nlohmann::json;

namespace {

// One line ending in '\n' with no other newline, and valid JSON (so a client can always parse it).
void check_line(const std::string& line, const char* what) {
  FUZZ_CHECK(!line.empty() && line.back() == '\n', std::string(what) + ": line does not end in newline");
  FUZZ_CHECK(std::count(line.begin(), line.end(), '\n') == 1, std::string(what) + ": more than one line");
  FUZZ_CHECK(json::accept(line), std::string(what) + ": not valid JSON: " + line.substr(0, 200));
}

}  // namespace

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  const std::string_view line = echoline::fuzz::as_text(data, size);
  auto parsed = service::parse_request(line);   // must not throw: no try here on purpose

  if (auto* req = std::get_if<service::Request>(&parsed)) {
    FUZZ_CHECK(line.size() < service::kMaxLineBytes, "accepted a line over kMaxLineBytes");
    FUZZ_CHECK(req->id.is_string() || req->id.is_number_integer(), "request id is neither string nor integer");
    FUZZ_CHECK(service::is_known_call(req->call), "accepted an unknown call: " + req->call);
    FUZZ_CHECK(req->args.is_object(), "args is not an object");
    check_line(service::reply_ok(req->id, req->args), "reply_ok");
    check_line(service::event_line(req->id, "progress", json{{"call", req->call}}), "event_line");
  } else {
    const auto& err = std::get<service::RequestError>(parsed);
    static const std::set<std::string> codes = {"bad_request", "unsupported_version", "unknown_call", "too_large"};
    FUZZ_CHECK(codes.count(err.code) == 1, "error code not in API.md: " + err.code);
    FUZZ_CHECK(!err.message.empty(), "RequestError without a message");
    FUZZ_CHECK(err.id.is_null() || err.id.is_string() || err.id.is_number_integer(), "error id of another type");
    if (line.size() >= service::kMaxLineBytes) FUZZ_CHECK(err.code == "too_large", "long line not too_large");
    check_line(service::reply_error(err.id, err.code, err.message), "reply_error");
  }
  // The writers survive the raw bytes as a string value (invalid UTF-8 replaced, never thrown).
  const json raw = std::string(line);
  const std::string dumped = service::dump_safe(raw);
  FUZZ_CHECK(json::accept(dumped), "dump_safe output is not valid JSON");
  check_line(service::reply_error(raw, "bad_request", std::string(line)), "reply_error(raw)");
  return 0;
}
