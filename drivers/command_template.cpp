// Command templates: the placeholder table, the operation table, parsing and expansion.
#include "drivers/command_template.hpp"

#include <algorithm>
#include <cmath>

#include <fmt/format.h>

namespace echoline::drivers {

const std::vector<PlaceholderInfo>& placeholder_table() {
  static const std::vector<PlaceholderInfo> table = {
      {"frequency_hz", PlaceholderType::number, "Hz"},
      {"power_dbm", PlaceholderType::number, "dBm"},
      {"db", PlaceholderType::number, "dB"},
      {"seconds", PlaceholderType::number, "s"},
      {"count", PlaceholderType::integer, ""},
      {"state", PlaceholderType::boolean, ""},
      {"position", PlaceholderType::token, ""},
      {"format", PlaceholderType::token, ""},
      {"byte_order", PlaceholderType::token, ""},
      {"mode", PlaceholderType::token, ""},
  };
  return table;
}

const std::vector<OperationSpec>& operation_table() {
  static const std::vector<OperationSpec> table = {
      // source
      {"set_frequency", "source", false, true, {"frequency_hz"}},
      {"set_power", "source", false, true, {"power_dbm"}},
      {"set_output", "source", false, true, {"state"}},
      {"sweep_start", "source", false, false, {"frequency_hz"}},
      {"sweep_stop", "source", false, false, {"frequency_hz"}},
      {"sweep_time", "source", false, false, {"seconds"}},
      {"sweep_mode", "source", false, false, {"mode"}},
      // receiver
      {"set_center", "receiver", false, true, {"frequency_hz"}},
      {"set_span", "receiver", false, true, {"frequency_hz"}},
      {"set_rbw", "receiver", false, true, {"frequency_hz"}},
      {"set_vbw", "receiver", false, true, {"frequency_hz"}, true},
      {"set_reference_level", "receiver", false, true, {"power_dbm"}, true},
      {"set_attenuation", "receiver", false, true, {"db"}, true},
      {"set_attenuation_auto", "receiver", false, false, {}},
      {"set_single", "receiver", false, true, {}},
      {"trigger", "receiver", false, true, {}},
      {"peak_search", "receiver", false, true, {}},
      {"read_marker_y", "receiver", true, true, {}},
      {"read_trace", "receiver", true, true, {}},
      {"set_trace_format", "receiver", false, false, {"format"}},
      {"set_byte_order", "receiver", false, false, {"byte_order"}},
      {"max_hold_on", "receiver", false, false, {}},
      {"max_hold_off", "receiver", false, false, {}},
      {"set_points", "receiver", false, false, {"count"}},
      {"set_sweep_time", "receiver", false, false, {"seconds"}},
      {"set_sweep_time_auto", "receiver", false, false, {}},
      {"trigger_external", "receiver", false, false, {}},
      {"trigger_immediate", "receiver", false, false, {}},
      {"set_trigger_delay", "receiver", false, false, {"seconds"}},
      {"abort", "receiver", false, false, {}},
      // switch
      {"select", "switch", false, true, {"position"}},
  };
  return table;
}

const OperationSpec* find_operation(std::string_view role, std::string_view operation) {
  for (const auto& op : operation_table())
    if (op.role == role && op.name == operation) return &op;
  return nullptr;
}

namespace {

const PlaceholderInfo* find_placeholder(std::string_view name) {
  for (const auto& p : placeholder_table())
    if (p.name == name) return &p;
  return nullptr;
}

std::string names_of(const std::vector<std::string_view>& names) {
  std::string s;
  for (auto n : names) s += (s.empty() ? "{" : ", {") + std::string(n) + "}";
  return s.empty() ? "none" : s;
}

std::string operations_of(std::string_view role) {
  std::string s;
  for (const auto& op : operation_table())
    if (op.role == role) s += (s.empty() ? "" : ", ") + std::string(op.name);
  return s;
}

// A token must not end the message unit or the message, nor open a string or block.
bool safe_token(std::string_view t) {
  if (t.empty()) return false;
  return std::none_of(t.begin(), t.end(), [](char c) {
    return c == ';' || c == '\n' || c == '\r' || c == '"' || c == '\'' || c == '#' || c == '{' || c == '}' ||
           static_cast<unsigned char>(c) < 0x20 || static_cast<unsigned char>(c) > 0x7e;
  });
}

}  // namespace

std::string format_wire_number(double value) {
  // fmt's default for double is the shortest decimal that round-trips, written with '.'
  // regardless of the global locale ("915000000", "-10.5", "2.4835e+09" only past 1e16).
  if (value == 0) return "0";   // no "-0"
  return fmt::format("{}", value);
}

Result<CommandTemplate> CommandTemplate::parse(std::string_view role, std::string_view operation,
                                               std::string_view text) {
  const OperationSpec* spec = find_operation(role, operation);
  if (!spec) {
    // The one renamed operation gets a pointer to its successors.
    const std::string_view hint = operation == "set_max_hold" ? " (set_max_hold is now max_hold_on and max_hold_off, "
                                                                "each with its full command text)" : "";
    return make_error(ErrorKind::config, fmt::format("unknown operation \"{}\" for role {}{}; known: {}", operation,
                                                     role, hint, operations_of(role)));
  }
  CommandTemplate t;
  t.text_ = std::string(text);
  t.operation_ = std::string(operation);
  t.query_ = spec->query;
  if (text.find_first_not_of(" \t") == std::string_view::npos)
    return make_error(ErrorKind::config, "empty command");
  std::string literal;
  std::size_t used = 0;
  for (std::size_t i = 0; i < text.size(); ++i) {
    char c = text[i];
    if (c == '\n' || c == '\r')
      return make_error(ErrorKind::config, "line terminator inside a command (the profile's io.write_terminator adds it)");
    if (c == '{' && i + 1 < text.size() && text[i + 1] == '{') { literal += '{'; ++i; continue; }
    if (c == '}' && i + 1 < text.size() && text[i + 1] == '}') { literal += '}'; ++i; continue; }
    if (c == '}') return make_error(ErrorKind::config, fmt::format("unmatched '}}' at column {} (write '}}}}' for a literal brace)", i + 1));
    if (c != '{') { literal += c; continue; }
    auto close = text.find('}', i + 1);
    if (close == std::string_view::npos)
      return make_error(ErrorKind::config, fmt::format("unclosed '{{' at column {}", i + 1));
    std::string_view name = text.substr(i + 1, close - i - 1);
    if (!find_placeholder(name)) {
      std::string all;
      for (const auto& p : placeholder_table()) all += (all.empty() ? "{" : ", {") + std::string(p.name) + "}";
      return make_error(ErrorKind::config, fmt::format("unknown placeholder {{{}}}; known placeholders: {}", name, all));
    }
    if (std::find(spec->placeholders.begin(), spec->placeholders.end(), name) == spec->placeholders.end())
      return make_error(ErrorKind::config, fmt::format("placeholder {{{}}} is not allowed in {}; allowed: {}", name,
                                                       operation, names_of(spec->placeholders)));
    if (!literal.empty()) t.pieces_.push_back({false, std::move(literal)});
    literal.clear();
    t.pieces_.push_back({true, std::string(name)});
    ++used;
    i = close;
  }
  if (!literal.empty()) t.pieces_.push_back({false, std::move(literal)});
  if (!spec->placeholders.empty() && used == 0)
    return make_error(ErrorKind::config, fmt::format("{} must use one of the placeholders {} (the value would not be sent)",
                                                     operation, names_of(spec->placeholders)));
  bool has_question = text.find('?') != std::string_view::npos;
  if (spec->query && !has_question)
    return make_error(ErrorKind::config, fmt::format("{} is a query and must contain '?'", operation));
  if (!spec->query && has_question)
    return make_error(ErrorKind::config,
                      fmt::format("{} expects no reply but the command contains '?' (a query): its reply would be "
                                  "taken as the answer to the next query", operation));
  return t;
}

std::vector<std::string> CommandTemplate::placeholders() const {
  std::vector<std::string> out;
  for (const auto& p : pieces_)
    if (p.placeholder) out.push_back(p.text);
  return out;
}

Result<std::string> CommandTemplate::expand(std::initializer_list<TemplateArg> args) const {
  return expand(std::vector<TemplateArg>(args));
}

Result<std::string> CommandTemplate::expand(const std::vector<TemplateArg>& args) const {
  std::string out;
  for (const auto& piece : pieces_) {
    if (!piece.placeholder) { out += piece.text; continue; }
    auto it = std::find_if(args.begin(), args.end(), [&](const TemplateArg& a) { return a.name == piece.text; });
    if (it == args.end())
      return make_error(ErrorKind::invalid_argument, fmt::format("{}: no value for {{{}}}", operation_, piece.text));
    const PlaceholderInfo* info = find_placeholder(piece.text);
    const auto& v = it->value;
    switch (info->type) {
      case PlaceholderType::number: {
        double d = 0;
        if (const double* pd = std::get_if<double>(&v)) d = *pd;
        else if (const std::int64_t* pi = std::get_if<std::int64_t>(&v)) d = static_cast<double>(*pi);
        else return make_error(ErrorKind::invalid_argument, fmt::format("{}: {{{}}} needs a number", operation_, piece.text));
        if (!std::isfinite(d))
          return make_error(ErrorKind::invalid_argument, fmt::format("{}: {{{}}} is not a finite number", operation_, piece.text));
        out += format_wire_number(d);
        break;
      }
      case PlaceholderType::integer: {
        if (const std::int64_t* pi = std::get_if<std::int64_t>(&v)) out += fmt::format("{}", *pi);
        else return make_error(ErrorKind::invalid_argument, fmt::format("{}: {{{}}} needs a whole number", operation_, piece.text));
        break;
      }
      case PlaceholderType::boolean: {
        const bool* pb = std::get_if<bool>(&v);
        if (!pb) return make_error(ErrorKind::invalid_argument, fmt::format("{}: {{{}}} needs true/false", operation_, piece.text));
        out += *pb ? "ON" : "OFF";   // SCPI-1999 Vol 1 7.3 boolean program data
        break;
      }
      case PlaceholderType::token: {
        const std::string* ps = std::get_if<std::string>(&v);
        if (!ps) return make_error(ErrorKind::invalid_argument, fmt::format("{}: {{{}}} needs a token", operation_, piece.text));
        if (!safe_token(*ps))
          return make_error(ErrorKind::invalid_argument,
                            fmt::format("{}: {{{}}} value \"{}\" is empty or holds a character that would break the command",
                                        operation_, piece.text, *ps));
        out += *ps;
        break;
      }
    }
  }
  return out;
}

}  // namespace echoline::drivers
