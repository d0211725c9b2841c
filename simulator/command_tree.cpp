// SCPI command tree: see command_tree.hpp.
#include "simulator/command_tree.hpp"

#include <algorithm>
#include <charconv>
#include <cmath>
#include <stdexcept>

namespace echoline::sim {

std::optional<ScpiError> check_param_count(const Call& call, std::size_t min, std::size_t max) {
  const std::size_t n = call.params().size();
  if (n < min) return ScpiError{-109, call.unit.header_text + " needs " + std::to_string(min) + " parameter(s)"};
  if (n > max) return ScpiError{-108, call.unit.header_text + " takes " + std::to_string(max) + " parameter(s), got " + std::to_string(n)};
  return std::nullopt;
}

namespace {

[[noreturn]] void bad_pattern(std::string_view pattern, const std::string& why) {
  throw std::invalid_argument("command pattern '" + std::string(pattern) + "': " + why);
}

std::string trim_colons(std::string_view s) {
  while (!s.empty() && s.front() == ':') s.remove_prefix(1);
  while (!s.empty() && s.back() == ':') s.remove_suffix(1);
  return std::string(s);
}

}  // namespace

void CommandTree::add(std::string_view pattern, Handler handler) {
  Command cmd;
  cmd.pattern = std::string(pattern);
  cmd.handler = std::move(handler);
  std::string_view p = pattern;
  if (p.size() >= 3 && p.substr(p.size() - 3) == "[?]") {
    cmd.allows_query = true;
    cmd.allows_set = true;
    p.remove_suffix(3);
  } else if (!p.empty() && p.back() == '?') {
    cmd.allows_query = true;
    cmd.allows_set = false;
    p.remove_suffix(1);
  }
  if (p.empty()) bad_pattern(pattern, "empty");
  if (p.front() == '*') {
    cmd.common = true;
    cmd.common_name = mnemonic_forms(p).long_form;
    commands_.push_back(std::move(cmd));
    return;
  }
  auto parse_alternatives = [&](std::string_view group, bool optional) {
    Node node;
    node.optional = optional;
    std::size_t start = 0;
    while (start <= group.size()) {
      std::size_t bar = group.find('|', start);
      if (bar == std::string_view::npos) bar = group.size();
      std::string alt = trim_colons(group.substr(start, bar - start));
      Alternative a;
      if (auto brace = alt.find('{'); brace != std::string::npos) {
        auto colon = alt.find(':', brace);
        auto close = alt.find('}', brace);
        if (colon == std::string::npos || close == std::string::npos || close != alt.size() - 1) bad_pattern(pattern, "bad suffix range in '" + alt + "'");
        a.has_suffix = true;
        std::from_chars(alt.data() + brace + 1, alt.data() + colon, a.lo);
        std::from_chars(alt.data() + colon + 1, alt.data() + close, a.hi);
        alt = alt.substr(0, brace);
      }
      if (alt.empty()) bad_pattern(pattern, "empty node");
      const MnemonicForms f = mnemonic_forms(alt);
      a.long_form = f.long_form;
      a.short_form = f.short_form;
      node.alternatives.push_back(std::move(a));
      start = bar + 1;
    }
    cmd.nodes.push_back(std::move(node));
  };
  std::size_t i = 0;
  while (i < p.size()) {
    if (p[i] == ':') { ++i; continue; }
    if (p[i] == '[') {
      const std::size_t close = p.find(']', i);
      if (close == std::string_view::npos) bad_pattern(pattern, "unclosed '['");
      parse_alternatives(p.substr(i + 1, close - i - 1), true);
      i = close + 1;
      continue;
    }
    std::size_t end = i;
    int brace = 0;
    while (end < p.size() && (brace > 0 || (p[end] != ':' && p[end] != '['))) {
      if (p[end] == '{') ++brace;
      if (p[end] == '}') --brace;
      ++end;
    }
    parse_alternatives(p.substr(i, end - i), false);
    i = end;
  }
  commands_.push_back(std::move(cmd));
}

std::variant<const CommandTree::Command*, ScpiError> CommandTree::resolve(const MessageUnit& unit,
                                                                          const std::vector<Keyword>& full,
                                                                          std::vector<int>& suffixes) const {
  bool form_mismatch = false;
  std::optional<ScpiError> suffix_error;
  for (const Command& cmd : commands_) {
    if (cmd.common != unit.common) continue;
    bool matched = false;
    std::vector<int> found;
    if (cmd.common) {
      matched = cmd.common_name == unit.common_name;
    } else {
      // Backtracking over optional nodes; suffix values recorded per suffix-capable node.
      std::function<bool(std::size_t, std::size_t, std::vector<int>&)> match =
          [&](std::size_t k, std::size_t n, std::vector<int>& sfx) -> bool {
        if (n == cmd.nodes.size()) return k == full.size();
        const Node& node = cmd.nodes[n];
        if (k < full.size()) {
          for (const Alternative& a : node.alternatives) {
            const Keyword& kw = full[k];
            if (kw.mnemonic != a.long_form && kw.mnemonic != a.short_form) continue;
            if (kw.suffix && !a.has_suffix) continue;  // a suffix on a node that takes none
            const std::size_t mark = sfx.size();
            if (a.has_suffix) sfx.push_back(kw.suffix.value_or(1));
            if (match(k + 1, n + 1, sfx)) {
              if (a.has_suffix && kw.suffix && (*kw.suffix < a.lo || *kw.suffix > a.hi)) {
                // SCPI-99 Vol 1 §6.2.5.2: out-of-range numeric suffix is -114.
                suffix_error = ScpiError{-114, unit.header_text + " (" + std::to_string(*kw.suffix) + " not in " +
                                                   std::to_string(a.lo) + ".." + std::to_string(a.hi) + ")"};
              }
              return true;
            }
            sfx.resize(mark);
          }
        }
        if (node.optional) {
          const std::size_t mark = sfx.size();
          bool takes_suffix = false;
          for (const Alternative& a : node.alternatives) takes_suffix |= a.has_suffix;
          if (takes_suffix) sfx.push_back(1);
          if (match(k, n + 1, sfx)) return true;
          sfx.resize(mark);
        }
        return false;
      };
      suffix_error.reset();
      matched = match(0, 0, found);
    }
    if (!matched) continue;
    if ((unit.query && !cmd.allows_query) || (!unit.query && !cmd.allows_set)) {
      form_mismatch = true;
      continue;
    }
    if (suffix_error) return *suffix_error;
    suffixes = std::move(found);
    return &cmd;
  }
  std::string detail = unit.header_text;
  if (form_mismatch) detail += unit.query ? " (no query form)" : " (query only)";
  return ScpiError{-113, detail};
}

std::vector<Reply> CommandTree::execute(std::string_view message, StatusModel& status, double now_s) {
  std::vector<Reply> replies;
  status.advance(now_s);
  auto split = split_units(message);
  if (auto* e = std::get_if<ScpiError>(&split)) {
    status.push_error(e->code, e->detail);
    return replies;
  }
  // The current path starts at the root for each program message (SCPI-99 Vol 1 §6.2.4,
  // from memory); after a command it is the header minus its last node.
  std::vector<Keyword> path;
  for (std::string_view text : std::get<std::vector<std::string_view>>(split)) {
    auto parsed = parse_unit(text);
    if (auto* e = std::get_if<ScpiError>(&parsed)) {
      status.push_error(e->code, e->detail);
      return replies;
    }
    const MessageUnit& unit = std::get<MessageUnit>(parsed);
    std::vector<Keyword> full;
    if (!unit.common) {
      if (!unit.absolute) full = path;
      full.insert(full.end(), unit.keywords.begin(), unit.keywords.end());
    }
    std::vector<int> suffixes;
    auto found = resolve(unit, full, suffixes);
    if (auto* e = std::get_if<ScpiError>(&found)) {
      status.push_error(e->code, e->detail);
      return replies;
    }
    if (!unit.common) {  // common commands leave the path alone (IEEE 488.2 §7.6.1.4, memory)
      path = full;
      path.pop_back();
    }
    const Command* cmd = std::get<const Command*>(found);
    Call call{unit, unit.query, std::move(suffixes), now_s};
    Outcome out = cmd->handler(call);
    if (out.error) status.push_error(out.error->code, out.error->detail);
    if (out.reply) {
      Reply r;
      r.has_reply = true;
      r.text = std::move(*out.reply);
      r.delay_s = std::max(out.delay_s, status.wait_remaining_s(now_s));
      replies.push_back(std::move(r));
    }
  }
  return replies;
}

}  // namespace echoline::sim

namespace echoline::sim {

Outcome numeric_setting(const Call& call, Unit unit, const NumericLimits& limits, double current,
                        const std::function<std::optional<ScpiError>(double)>& apply) {
  if (call.query) {
    if (auto e = check_param_count(call, 0, 1)) return Outcome::fail(*e);
    if (call.params().empty()) return Outcome::text(format_nr3(current));
    auto v = to_number(call.params()[0], unit, limits);  // "FREQ? MAX"
    if (auto* e = std::get_if<ScpiError>(&v)) return Outcome::fail(*e);
    if (call.params()[0].kind != Parameter::Kind::character) return Outcome::fail(-104, call.unit.header_text + " query takes MIN|MAX|DEF");
    return Outcome::text(format_nr3(std::get<double>(v)));
  }
  if (auto e = check_param_count(call, 1, 1)) return Outcome::fail(*e);
  auto v = to_number(call.params()[0], unit, limits);
  if (auto* e = std::get_if<ScpiError>(&v)) return Outcome::fail(*e);
  const double value = std::get<double>(v);
  const double slack = 1e-12 * std::max(std::abs(limits.min), std::abs(limits.max));
  if (!(value >= limits.min - slack && value <= limits.max + slack)) {
    return Outcome::fail(-222, call.unit.header_text + " " + call.params()[0].text +
                                   (call.params()[0].suffix.empty() ? "" : " " + call.params()[0].suffix) + " not in " +
                                   format_nr3(limits.min) + " .. " + format_nr3(limits.max));
  }
  if (auto e = apply(std::min(std::max(value, limits.min), limits.max))) return Outcome::fail(*e);
  return Outcome::done();
}

Outcome bool_setting(const Call& call, bool current, const std::function<void(bool)>& apply) {
  if (call.query) {
    if (auto e = check_param_count(call, 0, 0)) return Outcome::fail(*e);
    return Outcome::text(current ? "1" : "0");
  }
  if (auto e = check_param_count(call, 1, 1)) return Outcome::fail(*e);
  auto v = to_bool(call.params()[0]);
  if (auto* e = std::get_if<ScpiError>(&v)) return Outcome::fail(*e);
  apply(std::get<bool>(v));
  return Outcome::done();
}

Outcome choice_setting(const Call& call, const std::vector<std::string_view>& choices, std::size_t current,
                       const std::function<std::optional<ScpiError>(std::size_t)>& apply) {
  if (call.query) {
    if (auto e = check_param_count(call, 0, 0)) return Outcome::fail(*e);
    return Outcome::text(mnemonic_forms(choices.at(current)).short_form);
  }
  if (auto e = check_param_count(call, 1, 1)) return Outcome::fail(*e);
  auto v = to_choice(call.params()[0], choices);
  if (auto* e = std::get_if<ScpiError>(&v)) return Outcome::fail(*e);
  if (auto e = apply(std::get<std::size_t>(v))) return Outcome::fail(*e);
  return Outcome::done();
}

}  // namespace echoline::sim
