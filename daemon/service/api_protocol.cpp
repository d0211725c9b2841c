// Request parsing and reply formatting for the JSON-lines API (API.md).
#include "daemon/service/api_protocol.hpp"

#include <array>
#include <fmt/format.h>

namespace echoline::service {
namespace {

using nlohmann::json;

enum class ArgType { string, boolean, number };

struct ArgSpec {
  const char* key;
  ArgType type;
  bool required;
};

struct CallSpec {
  const char* name;
  std::vector<ArgSpec> args;
};

const std::vector<CallSpec>& calls() {
  static const std::vector<CallSpec> table = {
      {"hello", {{"role", ArgType::string, false}, {"token", ArgType::string, false}, {"client", ArgType::string, false}}},
      {"status", {}},
      {"test.start",
       {{"serial", ArgType::string, true},
        {"lot", ArgType::string, false},
        {"operator", ArgType::string, false},
        {"retest", ArgType::boolean, false}}},
      {"cal.start", {}},
      {"cal.answer", {{"standard", ArgType::string, true}, {"connected", ArgType::boolean, false}}},
      {"cal.check", {}},
      {"cal.status", {}},
      {"instruments.probe", {}},
      {"cancel", {}},
      {"recipe.select", {{"path", ArgType::string, true}}},
      {"runs.history", {{"serial", ArgType::string, true}}},
      {"runs.lot", {{"lot", ArgType::string, true}}},
      {"run.get", {{"run_id", ArgType::string, true}}},
      {"lot.summary", {{"lot", ArgType::string, false}}},
      // "path" is accepted only to be refused with a clear message: the daemon writes no file.
      {"report.lot", {{"lot", ArgType::string, true}, {"path", ArgType::string, false}}},
      {"export",
       {{"scope", ArgType::string, true},
        {"key", ArgType::string, true},
        {"format", ArgType::string, true},
        {"path", ArgType::string, false}}},
  };
  return table;
}

const CallSpec* find_call(std::string_view name) {
  for (const auto& c : calls()) {
    if (name == c.name) return &c;
  }
  return nullptr;
}

bool type_matches(const json& v, ArgType t) {
  switch (t) {
    case ArgType::string: return v.is_string();
    case ArgType::boolean: return v.is_boolean();
    case ArgType::number: return v.is_number();
  }
  return false;
}

const char* type_name(ArgType t) {
  switch (t) {
    case ArgType::string: return "a string";
    case ArgType::boolean: return "true or false";
    case ArgType::number: return "a number";
  }
  return "?";
}

RequestError bad(json id, std::string code, std::string message) {
  return RequestError{std::move(id), std::move(code), std::move(message)};
}

}  // namespace

bool is_known_call(std::string_view call) { return find_call(call) != nullptr; }

std::variant<Request, RequestError> parse_request(std::string_view line) {
  if (line.size() + 1 > kMaxLineBytes) {
    return bad(nullptr, "too_large", fmt::format("request: line of {} bytes exceeds the limit of {} bytes", line.size() + 1, kMaxLineBytes));
  }
  if (!line.empty() && line.back() == '\r') line.remove_suffix(1);
  json doc = json::parse(line.begin(), line.end(), nullptr, /*allow_exceptions=*/false);
  if (doc.is_discarded()) return bad(nullptr, "bad_request", "request: not valid JSON");
  if (!doc.is_object()) return bad(nullptr, "bad_request", "request: must be a JSON object");

  json id = nullptr;
  if (auto it = doc.find("id"); it != doc.end()) {
    if (it->is_string() || it->is_number_integer()) {
      id = *it;
    } else {
      return bad(nullptr, "bad_request", "request: \"id\" must be a string or an integer");
    }
  } else {
    return bad(nullptr, "bad_request", "request: \"id\" is missing");
  }
  if (auto it = doc.find("v"); it != doc.end()) {
    if (!it->is_number_integer()) return bad(id, "bad_request", "request: \"v\" must be an integer");
    if (it->get<long long>() != kApiVersion) {
      return bad(id, "unsupported_version", fmt::format("request: API version {} is not supported (this daemon speaks {})", it->dump(), kApiVersion));
    }
  }
  auto call_it = doc.find("call");
  if (call_it == doc.end()) return bad(id, "bad_request", "request: \"call\" is missing");
  if (!call_it->is_string()) return bad(id, "bad_request", "request: \"call\" must be a string");
  std::string call = call_it->get<std::string>();
  const CallSpec* spec = find_call(call);
  if (spec == nullptr) return bad(id, "unknown_call", fmt::format("request: unknown call {}", dump_safe(json(call.substr(0, 64)))));

  json args = json::object();
  if (auto it = doc.find("args"); it != doc.end() && !it->is_null()) {
    if (!it->is_object()) return bad(id, "bad_request", fmt::format("{}: \"args\" must be an object", call));
    args = *it;
  }
  for (const auto& a : spec->args) {
    auto it = args.find(a.key);
    if (it == args.end() || it->is_null()) {
      if (a.required) return bad(id, "bad_request", fmt::format("{}: argument \"{}\" is missing", call, a.key));
      continue;
    }
    if (!type_matches(*it, a.type)) {
      return bad(id, "bad_request", fmt::format("{}: argument \"{}\" must be {}", call, a.key, type_name(a.type)));
    }
  }
  return Request{std::move(id), std::move(call), std::move(args)};
}

std::string dump_safe(const json& value) {
  return value.dump(-1, ' ', false, json::error_handler_t::replace);
}

std::string reply_ok(const json& id, json result) {
  json j = {{"v", kApiVersion}, {"id", id}, {"ok", true}, {"result", std::move(result)}};
  return dump_safe(j) + "\n";
}

std::string reply_error(const json& id, std::string_view code, std::string_view message) {
  json j = {{"v", kApiVersion}, {"id", id}, {"ok", false},
            {"error", {{"code", std::string(code)}, {"message", std::string(message)}}}};
  return dump_safe(j) + "\n";
}

std::string event_line(const json& id, std::string_view event, json fields) {
  json j = {{"v", kApiVersion}, {"id", id}, {"event", std::string(event)}};
  if (fields.is_object()) {
    for (auto& [k, v] : fields.items()) j[k] = v;
  }
  return dump_safe(j) + "\n";
}

}  // namespace echoline::service
