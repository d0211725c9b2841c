// SCPI program-message parser: see scpi_parser.hpp. References in comments are to
// IEEE 488.2-1992 ch. 7 and SCPI-1999 Vol 1 ch. 6-7 (section numbers from memory).
#include "simulator/scpi_parser.hpp"

#include <array>
#include <cctype>
#include <charconv>
#include <cmath>
#include <limits>
#include <utility>

namespace echoline::sim {
namespace {

constexpr std::size_t kMaxMnemonic = 12;  // SCPI-99 Vol 1 §6.2.1 / error -112

bool is_alpha(char c) { return (c >= 'A' && c <= 'Z') || (c >= 'a' && c <= 'z'); }
bool is_digit(char c) { return c >= '0' && c <= '9'; }
char upper(char c) { return (c >= 'a' && c <= 'z') ? static_cast<char>(c - 'a' + 'A') : c; }

std::string to_upper(std::string_view s) {
  std::string out(s);
  for (char& c : out) c = upper(c);
  return out;
}

ScpiError err(int code, std::string detail) { return ScpiError{code, std::move(detail)}; }

// Cursor over one unit's text.
struct Cursor {
  std::string_view s;
  std::size_t pos = 0;
  bool end() const { return pos >= s.size(); }
  char peek(std::size_t ahead = 0) const { return pos + ahead < s.size() ? s[pos + ahead] : '\0'; }
  void skip_ws() {
    while (!end() && is_scpi_whitespace(s[pos])) ++pos;
  }
};

// Definite block "#<n><len>": returns total bytes of header + payload, or nullopt if malformed.
std::optional<std::pair<std::size_t, std::size_t>> definite_block(std::string_view s, std::size_t at) {
  // s[at] == '#', s[at+1] in '1'..'9'
  const std::size_t n = static_cast<std::size_t>(s[at + 1] - '0');
  if (at + 2 + n > s.size()) return std::nullopt;
  std::size_t len = 0;
  for (std::size_t i = 0; i < n; ++i) {
    char c = s[at + 2 + i];
    if (!is_digit(c)) return std::nullopt;
    len = len * 10 + static_cast<std::size_t>(c - '0');
  }
  const std::size_t header = 2 + n;
  if (at + header + len > s.size()) return std::nullopt;
  return std::make_pair(header, len);
}

ScpiResult<Parameter> parse_decimal(Cursor& c) {
  const std::size_t start = c.pos;
  std::string text;
  if (c.peek() == '+' || c.peek() == '-') {
    if (c.peek() == '-') text.push_back('-');
    ++c.pos;
  }
  std::size_t digits = 0;
  while (is_digit(c.peek())) { text.push_back(c.peek()); ++c.pos; ++digits; }
  if (c.peek() == '.') {
    text.push_back('.');
    ++c.pos;
    while (is_digit(c.peek())) { text.push_back(c.peek()); ++c.pos; ++digits; }
  }
  if (digits == 0) return err(-120, std::string(c.s.substr(start, c.pos - start + 1)));
  // Exponent: E/e followed by an optional sign and at least one digit (IEEE 488.2 §7.7.2.2).
  if ((c.peek() == 'E' || c.peek() == 'e') &&
      (is_digit(c.peek(1)) || ((c.peek(1) == '+' || c.peek(1) == '-') && is_digit(c.peek(2))))) {
    text.push_back('e');
    ++c.pos;
    if (c.peek() == '+' || c.peek() == '-') { text.push_back(c.peek()); ++c.pos; }
    while (is_digit(c.peek())) { text.push_back(c.peek()); ++c.pos; }
  }
  Parameter p;
  p.kind = Parameter::Kind::decimal;
  p.text = std::string(c.s.substr(start, c.pos - start));
  // from_chars rejects a leading '+' and needs a digit before '.'; normalise.
  std::string norm = text;
  if (!norm.empty() && norm[0] == '.') norm.insert(0, "0");
  if (norm.size() > 1 && norm[0] == '-' && norm[1] == '.') norm.insert(1, "0");
  auto [ptr, ec] = std::from_chars(norm.data(), norm.data() + norm.size(), p.number);
  if (ec == std::errc::result_out_of_range) {
    p.number = (norm[0] == '-') ? -std::numeric_limits<double>::infinity() : std::numeric_limits<double>::infinity();
  } else if (ec != std::errc() || ptr != norm.data() + norm.size()) {
    return err(-120, p.text);
  }
  // Optional whitespace, then an optional suffix (IEEE 488.2 §7.7.3).
  std::size_t save = c.pos;
  c.skip_ws();
  if (is_alpha(c.peek())) {
    std::size_t s0 = c.pos;
    while (is_alpha(c.peek()) || c.peek() == '/' || c.peek() == '.' || is_digit(c.peek())) ++c.pos;
    p.suffix = to_upper(c.s.substr(s0, c.pos - s0));
  } else {
    c.pos = save;
  }
  return p;
}

ScpiResult<Parameter> parse_nondecimal(Cursor& c) {
  // '#' then H|Q|B then digits of that base (IEEE 488.2 §7.7.4).
  const std::size_t start = c.pos;
  const char base_ch = upper(c.peek(1));
  const int base = base_ch == 'H' ? 16 : base_ch == 'Q' ? 8 : 2;
  c.pos += 2;
  double value = 0;
  std::size_t digits = 0;
  while (!c.end()) {
    char ch = upper(c.peek());
    int d = -1;
    if (is_digit(ch)) d = ch - '0';
    else if (ch >= 'A' && ch <= 'F') d = 10 + ch - 'A';
    else break;
    if (d >= base) return err(-120, std::string(c.s.substr(start, c.pos - start + 1)));
    value = value * base + d;
    ++digits;
    ++c.pos;
  }
  if (digits == 0) return err(-120, std::string(c.s.substr(start, c.pos - start)));
  Parameter p;
  p.kind = Parameter::Kind::nondecimal;
  p.text = std::string(c.s.substr(start, c.pos - start));
  p.number = value;
  return p;
}

ScpiResult<Parameter> parse_string(Cursor& c) {
  const char quote = c.peek();
  const std::size_t start = c.pos;
  ++c.pos;
  Parameter p;
  p.kind = Parameter::Kind::string;
  while (true) {
    if (c.end()) return err(-151, std::string(c.s.substr(start)));
    char ch = c.peek();
    ++c.pos;
    if (ch == quote) {
      if (c.peek() == quote) { p.text.push_back(quote); ++c.pos; continue; }  // doubled quote
      break;
    }
    p.text.push_back(ch);
  }
  return p;
}

ScpiResult<Parameter> parse_block(Cursor& c) {
  Parameter p;
  p.kind = Parameter::Kind::block;
  if (c.peek(1) == '0') {  // indefinite length: runs to the end of the message (§7.7.6.2)
    p.text = std::string(c.s.substr(c.pos + 2));
    c.pos = c.s.size();
    return p;
  }
  auto blk = definite_block(c.s, c.pos);
  if (!blk) return err(-161, std::string(c.s.substr(c.pos, 16)));
  p.text = std::string(c.s.substr(c.pos + blk->first, blk->second));
  c.pos += blk->first + blk->second;
  return p;
}

ScpiResult<int> parse_int(Cursor& c) {
  std::size_t s0 = c.pos;
  while (is_digit(c.peek())) ++c.pos;
  if (c.pos == s0) return err(-170, "channel number expected at '" + std::string(c.s.substr(s0, 8)) + "'");
  int v = 0;
  auto [ptr, ec] = std::from_chars(c.s.data() + s0, c.s.data() + c.pos, v);
  if (ec != std::errc()) return err(-170, "channel number too large");
  (void)ptr;
  return v;
}

ScpiResult<Parameter> parse_channel_list(Cursor& c) {
  // "(@1,3:5)" (SCPI-99 Vol 1 §8.3.2, channel list, from memory).
  const std::size_t start = c.pos;
  c.pos += 2;
  Parameter p;
  p.kind = Parameter::Kind::channel_list;
  while (true) {
    c.skip_ws();
    auto a = parse_int(c);
    if (auto* e = std::get_if<ScpiError>(&a)) return *e;
    int first = std::get<int>(a);
    int last = first;
    c.skip_ws();
    if (c.peek() == ':') {
      ++c.pos;
      c.skip_ws();
      auto b = parse_int(c);
      if (auto* e = std::get_if<ScpiError>(&b)) return *e;
      last = std::get<int>(b);
      if (last < first || last - first > 10000) return err(-170, "bad channel range " + std::to_string(first) + ":" + std::to_string(last));
    }
    for (int ch = first; ch <= last; ++ch) p.channels.push_back(ch);
    c.skip_ws();
    if (c.peek() == ',') { ++c.pos; continue; }
    if (c.peek() == ')') { ++c.pos; break; }
    return err(-170, "channel list not closed: " + std::string(c.s.substr(start)));
  }
  p.text = std::string(c.s.substr(start, c.pos - start));
  return p;
}

ScpiResult<Parameter> parse_parameter(Cursor& c) {
  const char ch = c.peek();
  if (is_digit(ch) || ch == '+' || ch == '-' || ch == '.') return parse_decimal(c);
  if (ch == '#') {
    const char n = upper(c.peek(1));
    if (n == 'H' || n == 'Q' || n == 'B') return parse_nondecimal(c);
    if (is_digit(n)) return parse_block(c);
    return err(-161, std::string(c.s.substr(c.pos, 8)));
  }
  if (ch == '"' || ch == '\'') return parse_string(c);
  if (ch == '(') {
    if (c.peek(1) == '@') return parse_channel_list(c);
    return err(-170, "expression data not supported: " + std::string(c.s.substr(c.pos, 16)));
  }
  if (is_alpha(ch)) {
    std::size_t s0 = c.pos;
    while (is_alpha(c.peek()) || is_digit(c.peek()) || c.peek() == '_') ++c.pos;
    Parameter p;
    p.kind = Parameter::Kind::character;
    p.text = to_upper(c.s.substr(s0, c.pos - s0));
    if (p.text.size() > kMaxMnemonic) return err(-144, p.text);  // character data too long
    return p;
  }
  if (ch == ',') return err(-102, "empty parameter");
  return err(-101, std::string(1, ch));
}

// One header keyword: letters first, then letters/digits/underscore; trailing digits are the
// numeric suffix (SCPI-99 Vol 1 §6.2.5).
ScpiResult<Keyword> parse_keyword(Cursor& c) {
  if (!is_alpha(c.peek())) {
    if (c.peek() == ':') return err(-102, "empty header node in '" + std::string(c.s) + "'");
    if (c.end() || is_scpi_whitespace(c.peek())) return err(-102, "header ends with ':'");
    return err(-101, std::string(1, c.peek()));
  }
  std::size_t s0 = c.pos;
  while (is_alpha(c.peek()) || is_digit(c.peek()) || c.peek() == '_') ++c.pos;
  std::string_view word = c.s.substr(s0, c.pos - s0);
  if (word.size() > kMaxMnemonic) return err(-112, std::string(word));
  std::size_t d = word.size();
  while (d > 0 && is_digit(word[d - 1])) --d;
  Keyword k;
  k.mnemonic = to_upper(word.substr(0, d));
  if (d < word.size()) {
    int v = 0;
    std::from_chars(word.data() + d, word.data() + word.size(), v);
    k.suffix = v;
  }
  return k;
}

const std::array<std::pair<std::string_view, double>, 12> kMultipliers{{
    // IEEE 488.2 Table 7-1 (as quoted in instrument programming manuals).
    {"EX", 1e18}, {"PE", 1e15}, {"T", 1e12}, {"G", 1e9}, {"MA", 1e6}, {"K", 1e3},
    {"M", 1e-3}, {"U", 1e-6}, {"N", 1e-9}, {"P", 1e-12}, {"F", 1e-15}, {"A", 1e-18}}};

std::optional<double> suffix_factor(std::string_view suffix, Unit unit) {
  std::string_view base;
  bool multipliers = true;
  switch (unit) {
    case Unit::hertz: base = "HZ"; break;
    case Unit::seconds: base = "S"; break;
    case Unit::dbm: base = "DBM"; multipliers = false; break;
    case Unit::db: base = "DB"; multipliers = false; break;
    case Unit::none: return std::nullopt;
  }
  if (suffix == base) return 1.0;
  // MHZ is megahertz, not millihertz (IEEE 488.2 §7.7.3.4, the MHZ/MOHM special case).
  if (unit == Unit::hertz && suffix == "MHZ") return 1e6;
  if (!multipliers || suffix.size() <= base.size() || suffix.substr(suffix.size() - base.size()) != base) return std::nullopt;
  std::string_view prefix = suffix.substr(0, suffix.size() - base.size());
  for (const auto& [name, factor] : kMultipliers) {
    if (prefix == name) return factor;
  }
  return std::nullopt;
}

}  // namespace

bool is_scpi_whitespace(char c) {
  const auto u = static_cast<unsigned char>(c);
  return u <= 0x20 && u != 0x0A;
}

ScpiResult<std::vector<std::string_view>> split_units(std::string_view message) {
  std::vector<std::string_view> units;
  std::size_t start = 0;
  std::size_t i = 0;
  auto add = [&](std::size_t end) {
    std::string_view u = message.substr(start, end - start);
    bool blank = true;
    for (char ch : u) {
      if (!is_scpi_whitespace(ch) && ch != '\n') { blank = false; break; }
    }
    if (!blank) units.push_back(u);
  };
  while (i < message.size()) {
    const char ch = message[i];
    if (ch == '"' || ch == '\'') {
      std::size_t j = i + 1;
      while (true) {
        if (j >= message.size()) return err(-151, std::string(message.substr(i, 24)));
        if (message[j] == ch) {
          if (j + 1 < message.size() && message[j + 1] == ch) { j += 2; continue; }
          break;
        }
        ++j;
      }
      i = j + 1;
    } else if (ch == '#' && i + 1 < message.size() && message[i + 1] == '0') {
      i = message.size();  // indefinite block: the rest of the message
    } else if (ch == '#' && i + 1 < message.size() && message[i + 1] >= '1' && message[i + 1] <= '9') {
      auto blk = definite_block(message, i);
      if (!blk) return err(-161, std::string(message.substr(i, 16)));
      i += blk->first + blk->second;
    } else if (ch == ';') {
      add(i);
      start = i + 1;
      ++i;
    } else {
      ++i;
    }
  }
  add(message.size());
  return units;
}

ScpiResult<MessageUnit> parse_unit(std::string_view text) {
  // A trailing LF is the terminator (treated as whitespace here).
  while (!text.empty() && (text.back() == '\n')) text.remove_suffix(1);
  Cursor c{text, 0};
  c.skip_ws();
  MessageUnit u;
  const std::size_t header_start = c.pos;
  if (c.peek() == '*') {  // common command header (IEEE 488.2 §7.6.1.2)
    ++c.pos;
    std::size_t s0 = c.pos;
    while (is_alpha(c.peek())) ++c.pos;
    if (c.pos == s0) return err(-102, "'*' without a command name");
    if (c.pos - s0 > kMaxMnemonic) return err(-112, std::string(text.substr(s0, c.pos - s0)));
    u.common = true;
    u.common_name = "*" + to_upper(text.substr(s0, c.pos - s0));
  } else {
    if (c.peek() == ':') { u.absolute = true; ++c.pos; }
    while (true) {
      auto k = parse_keyword(c);
      if (auto* e = std::get_if<ScpiError>(&k)) return *e;
      u.keywords.push_back(std::move(std::get<Keyword>(k)));
      if (c.peek() != ':') break;
      ++c.pos;
    }
  }
  if (c.peek() == '?') { u.query = true; ++c.pos; }
  u.header_text = std::string(text.substr(header_start, c.pos - header_start));
  if (c.end()) return u;
  if (!is_scpi_whitespace(c.peek())) return err(-111, "after header '" + u.header_text + "': '" + std::string(1, c.peek()) + "'");
  c.skip_ws();
  if (c.end()) return u;
  while (true) {
    auto p = parse_parameter(c);
    if (auto* e = std::get_if<ScpiError>(&p)) return *e;
    u.params.push_back(std::move(std::get<Parameter>(p)));
    c.skip_ws();
    if (c.end()) break;
    if (c.peek() != ',') return err(-103, "'" + std::string(1, c.peek()) + "' after parameter " + std::to_string(u.params.size()) + " of " + u.header_text);
    ++c.pos;
    c.skip_ws();
    if (c.end()) return err(-102, "parameter missing after ',' in " + u.header_text);
  }
  return u;
}

ScpiResult<double> to_number(const Parameter& p, Unit unit, const NumericLimits& limits) {
  switch (p.kind) {
    case Parameter::Kind::character: {
      const std::string& t = p.text;
      if (t == "MIN" || t == "MINIMUM") return limits.min;
      if (t == "MAX" || t == "MAXIMUM") return limits.max;
      if (t == "DEF" || t == "DEFAULT") return limits.def;
      // INF / NINF / NAN (SCPI-99 Vol 1 §7.2.1.5, from memory).
      if (t == "INF") return 9.9e37;
      if (t == "NINF") return -9.9e37;
      if (t == "NAN") return 9.91e37;
      return err(-141, t);
    }
    case Parameter::Kind::nondecimal:
      return p.number;
    case Parameter::Kind::decimal: {
      if (p.suffix.empty()) return p.number;
      if (unit == Unit::none) return err(-138, p.suffix);
      auto f = suffix_factor(p.suffix, unit);
      if (!f) return err(-131, p.suffix);
      return p.number * *f;
    }
    default:
      return err(-104, "numeric expected, got '" + p.text + "'");
  }
}

ScpiResult<bool> to_bool(const Parameter& p) {
  if (p.kind == Parameter::Kind::character) {
    if (p.text == "ON") return true;
    if (p.text == "OFF") return false;
    return err(-224, p.text);
  }
  if (p.kind == Parameter::Kind::decimal || p.kind == Parameter::Kind::nondecimal) {
    if (!p.suffix.empty()) return err(-138, p.suffix);
    return std::lround(p.number) != 0;  // IEEE 488.2 §10 / SCPI-99 §7.3: rounded, non-zero = ON
  }
  return err(-104, "boolean expected, got '" + p.text + "'");
}

ScpiResult<std::size_t> to_choice(const Parameter& p, const std::vector<std::string_view>& choices) {
  if (p.kind != Parameter::Kind::character) return err(-104, "character data expected, got '" + p.text + "'");
  for (std::size_t i = 0; i < choices.size(); ++i) {
    if (mnemonic_matches(p.text, choices[i])) return i;
  }
  return err(-224, p.text);
}

MnemonicForms mnemonic_forms(std::string_view mixed_case) {
  MnemonicForms f;
  f.long_form = to_upper(mixed_case);
  std::size_t n = 0;
  while (n < mixed_case.size() && !(mixed_case[n] >= 'a' && mixed_case[n] <= 'z')) ++n;
  f.short_form = f.long_form.substr(0, n);
  if (f.short_form.empty()) f.short_form = f.long_form;
  return f;
}

bool mnemonic_matches(std::string_view typed, std::string_view mixed_case) {
  const MnemonicForms f = mnemonic_forms(mixed_case);
  const std::string t = to_upper(typed);
  return t == f.long_form || t == f.short_form;
}

std::string format_nr3(double value) {
  if (std::isnan(value)) return "9.91E+37";
  if (std::isinf(value)) return value > 0 ? "9.9E+37" : "-9.9E+37";
  char buf[64];
  auto [ptr, ec] = std::to_chars(buf, buf + sizeof buf, value, std::chars_format::scientific);
  std::string s(buf, ec == std::errc() ? ptr : buf);
  const auto e = s.find('e');
  if (e == std::string::npos) return s;
  s[e] = 'E';
  if (s.find('.') == std::string::npos) s.insert(e, ".0");
  return s;
}

}  // namespace echoline::sim
