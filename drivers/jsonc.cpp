// JSON-with-comments loading: nlohmann parses (comments on, trailing commas refused); a second
// pass over the text records the line of every key and array element and refuses duplicate keys.
#include "drivers/jsonc.hpp"

#include <algorithm>
#include <cmath>
#include <fstream>
#include <set>
#include <sstream>

#include <fmt/format.h>

namespace echoline::drivers {
namespace {

using nlohmann::json;

std::string escape_token(std::string_view key) {
  std::string out;
  for (char c : key) {
    if (c == '~') out += "~0";
    else if (c == '/') out += "~1";
    else out += c;
  }
  return out;
}

int line_at(std::string_view text, std::size_t offset) {
  offset = std::min(offset, text.size());
  return 1 + static_cast<int>(std::count(text.begin(), text.begin() + static_cast<std::ptrdiff_t>(offset), '\n'));
}

// A short rendering of a value for messages.
std::string show(const json& v) {
  std::string s = v.dump();
  if (s.size() > 40) s = s.substr(0, 37) + "...";
  return s;
}

std::string join(const std::vector<std::string>& items) {
  std::string s;
  for (const auto& i : items) s += (s.empty() ? "" : ", ") + i;
  return s;
}

std::size_t edit_distance(std::string_view a, std::string_view b) {
  std::vector<std::size_t> prev(b.size() + 1), cur(b.size() + 1);
  for (std::size_t j = 0; j <= b.size(); ++j) prev[j] = j;
  for (std::size_t i = 1; i <= a.size(); ++i) {
    cur[0] = i;
    for (std::size_t j = 1; j <= b.size(); ++j)
      cur[j] = std::min({prev[j] + 1, cur[j - 1] + 1, prev[j - 1] + (a[i - 1] == b[j - 1] ? 0 : 1)});
    std::swap(prev, cur);
  }
  return prev[b.size()];
}

// The line-tracking pass. Walks JSON-with-comments text, recording pointer -> line for each key
// (line of the key) and each array element / the root (line where the value starts).
// With stop_at set, it stops there and reports the pointer it was inside (for syntax errors).
class LineScanner {
 public:
  LineScanner(std::string_view text, const std::string& file) : text_(text), file_(file) {}

  // Full pass over valid JSON; throws ConfigError on a duplicate key.
  std::map<std::string, int> scan() {
    run(text_.size());
    return std::move(lines_);
  }

  // Pointer of the innermost key or element being read at byte offset `stop_at`.
  std::string pointer_at(std::size_t stop_at) {
    try {
      run(stop_at);
    } catch (const ConfigError&) {
    }
    if (frames_.empty()) return last_value_ptr_;
    const Frame& f = frames_.back();
    if (f.object && !f.key_ptr.empty()) return f.key_ptr;
    if (!f.object && f.next_index > 0) return f.base + "/" + std::to_string(f.next_index - 1);
    return f.base;
  }

 private:
  struct Frame {
    bool object = false;
    std::string base;          // pointer of this container
    bool expect_key = true;    // object: next string is a key
    std::string key_ptr;       // object: pointer of the current member
    std::map<std::string, int> keys;   // object: key -> line, for duplicates
    std::size_t next_index = 0;        // array
  };

  // Called where a value begins; returns that value's pointer.
  std::string value_start() {
    std::string ptr;
    if (frames_.empty()) {
      ptr = "";
      lines_.emplace(ptr, line_);
    } else if (frames_.back().object) {
      ptr = frames_.back().key_ptr;
    } else {
      Frame& f = frames_.back();
      ptr = f.base + "/" + std::to_string(f.next_index++);
      lines_.emplace(ptr, line_);
    }
    last_value_ptr_ = ptr;
    return ptr;
  }

  void run(std::size_t stop_at) {
    std::size_t i = 0;
    const std::size_t n = std::min(stop_at, text_.size());
    while (i < n) {
      char c = text_[i];
      if (c == '\n') { ++line_; ++i; continue; }
      if (c == ' ' || c == '\t' || c == '\r') { ++i; continue; }
      if (c == '/' && i + 1 < text_.size() && text_[i + 1] == '/') {
        while (i < n && text_[i] != '\n') ++i;
        continue;
      }
      if (c == '/' && i + 1 < text_.size() && text_[i + 1] == '*') {
        i += 2;
        while (i < n && !(text_[i] == '*' && i + 1 < text_.size() && text_[i + 1] == '/')) {
          if (text_[i] == '\n') ++line_;
          ++i;
        }
        i += 2;
        continue;
      }
      if (c == '"') {
        std::size_t start = i++;
        while (i < text_.size() && text_[i] != '"') {
          if (text_[i] == '\\') ++i;
          ++i;
        }
        ++i;   // closing quote
        std::string_view literal = text_.substr(start, std::min(i, text_.size()) - start);
        if (!frames_.empty() && frames_.back().object && frames_.back().expect_key) {
          std::string key;
          try {
            key = json::parse(literal).get<std::string>();
          } catch (const json::exception&) {
            key = std::string(literal);
          }
          Frame& f = frames_.back();
          f.expect_key = false;
          f.key_ptr = f.base + "/" + escape_token(key);
          auto [it, fresh] = f.keys.emplace(key, line_);
          if (!fresh)
            throw ConfigError(file_, line_, f.key_ptr,
                              fmt::format("duplicate key \"{}\" (first given on line {})", key, it->second));
          lines_[f.key_ptr] = line_;
        } else {
          value_start();
        }
        continue;
      }
      if (c == '{' || c == '[') {
        Frame f;
        f.object = (c == '{');
        f.base = value_start();
        frames_.push_back(std::move(f));
        ++i;
        continue;
      }
      if (c == '}' || c == ']') {
        if (!frames_.empty()) frames_.pop_back();
        ++i;
        continue;
      }
      if (c == ',') {
        if (!frames_.empty() && frames_.back().object) {
          frames_.back().expect_key = true;
          frames_.back().key_ptr.clear();
        }
        ++i;
        continue;
      }
      if (c == ':') { ++i; continue; }
      // number, true, false, null
      value_start();
      const std::size_t start = i;
      while (i < n && std::string_view(",]}/ \t\r\n").find(text_[i]) == std::string_view::npos) ++i;
      // A lone '/' that opens no comment: step over it (nlohmann reports the syntax error).
      if (i == start) ++i;
    }
  }

  std::string_view text_;
  const std::string& file_;
  int line_ = 1;
  std::vector<Frame> frames_;
  std::map<std::string, int> lines_;
  std::string last_value_ptr_;
};

// nlohmann's message without its "[json.exception...] parse error at line L, column C: " prefix.
std::string parse_message(const std::string& what) {
  auto pos = what.find(", column ");
  if (pos != std::string::npos) {
    auto colon = what.find(": ", pos);
    if (colon != std::string::npos) return what.substr(colon + 2);
  }
  auto bracket = what.find("] ");
  return bracket == std::string::npos ? what : what.substr(bracket + 2);
}

// The last character before `offset` that is not whitespace or inside a comment (approximate:
// comments are skipped by the scan that found the error; here only whitespace is skipped).
char previous_significant(std::string_view text, std::size_t offset) {
  while (offset > 0) {
    char c = text[--offset];
    if (c != ' ' && c != '\t' && c != '\r' && c != '\n') return c;
  }
  return '\0';
}

}  // namespace

std::string key_path(const JsonPointer& at) {
  std::string s = at.to_string();
  return s.empty() ? "/" : s;
}

JsoncDocument JsoncDocument::load(const std::filesystem::path& file) {
  std::ifstream in(file, std::ios::binary);
  if (!in) throw ConfigError(file.string(), 0, "", "cannot open file for reading");
  std::ostringstream ss;
  ss << in.rdbuf();
  if (in.bad()) throw ConfigError(file.string(), 0, "", "read error");
  return parse(ss.str(), file.string());
}

JsoncDocument JsoncDocument::parse(std::string text, std::string file_name) {
  JsoncDocument doc;
  doc.file_ = std::move(file_name);
  try {
    doc.root_ = json::parse(text, nullptr, /*allow_exceptions=*/true, /*ignore_comments=*/true);
  } catch (const json::parse_error& e) {
    std::size_t offset = e.byte > 0 ? e.byte - 1 : 0;   // byte counts characters read, 1-based
    offset = std::min(offset, text.size());
    std::string message = parse_message(e.what());
    if (offset < text.size() && (text[offset] == '}' || text[offset] == ']') &&
        previous_significant(text, offset) == ',')
      message = fmt::format("trailing comma before '{}' (not allowed): {}", text[offset], message);
    LineScanner scanner(text, doc.file_);
    std::string ptr = scanner.pointer_at(offset);
    throw ConfigError(doc.file_, line_at(text, offset), ptr.empty() ? "/" : ptr, message);
  } catch (const json::exception& e) {
    throw ConfigError(doc.file_, 0, "", e.what());
  }
  doc.lines_ = LineScanner(text, doc.file_).scan();
  return doc;
}

int JsoncDocument::line_of(const JsonPointer& at) const {
  JsonPointer p = at;
  for (;;) {
    auto it = lines_.find(p.to_string());
    if (it != lines_.end()) return it->second;
    if (p.empty()) return 0;
    p = p.parent_pointer();
  }
}

void JsoncDocument::fail(const JsonPointer& at, const std::string& message) const {
  throw ConfigError(file_, line_of(at), key_path(at), message);
}

bool JsoncDocument::has(const JsonPointer& at) const {
  try {
    return root_.contains(at);
  } catch (const json::exception&) {
    return false;
  }
}

const json& JsoncDocument::at(const JsonPointer& at) const {
  if (!has(at)) fail(at, "missing (required)");
  return root_.at(at);
}

const json& JsoncDocument::require_object(const JsonPointer& p) const {
  const json& v = at(p);
  if (!v.is_object()) fail(p, fmt::format("expected an object {{...}}, found {} {}", v.type_name(), show(v)));
  return v;
}

const json& JsoncDocument::require_array(const JsonPointer& p) const {
  const json& v = at(p);
  if (!v.is_array()) fail(p, fmt::format("expected an array [...], found {} {}", v.type_name(), show(v)));
  return v;
}

double JsoncDocument::require_number(const JsonPointer& p, std::string_view unit) const {
  const json& v = at(p);
  if (!v.is_number())
    fail(p, fmt::format("expected a number{}{}, found {} {}", unit.empty() ? "" : " in ", unit, v.type_name(), show(v)));
  return v.get<double>();
}

std::optional<double> JsoncDocument::optional_number(const JsonPointer& p, std::string_view unit) const {
  if (!has(p) || root_.at(p).is_null()) return std::nullopt;
  return require_number(p, unit);
}

double JsoncDocument::number_or(const JsonPointer& p, double fallback, std::string_view unit) const {
  return optional_number(p, unit).value_or(fallback);
}

double JsoncDocument::number_in(const JsonPointer& p, double fallback, double min, double max,
                                std::string_view unit) const {
  if (!has(p)) return fallback;
  double v = require_number(p, unit);
  if (v < min || v > max)
    fail(p, fmt::format("{} {} is out of range; allowed {} to {} {}", v, unit, min, max, unit));
  return v;
}

std::int64_t JsoncDocument::require_integer(const JsonPointer& p) const {
  const json& v = at(p);
  if (v.is_number_integer()) return v.get<std::int64_t>();
  if (v.is_number_float()) {
    double d = v.get<double>();
    if (std::isfinite(d) && d == std::floor(d) && std::fabs(d) < 9e15) return static_cast<std::int64_t>(d);
  }
  fail(p, fmt::format("expected a whole number, found {} {}", v.type_name(), show(v)));
}

std::int64_t JsoncDocument::integer_or(const JsonPointer& p, std::int64_t fallback) const {
  if (!has(p)) return fallback;
  return require_integer(p);
}

std::string JsoncDocument::require_string(const JsonPointer& p) const {
  const json& v = at(p);
  if (!v.is_string()) fail(p, fmt::format("expected a string, found {} {}", v.type_name(), show(v)));
  return v.get<std::string>();
}

std::optional<std::string> JsoncDocument::optional_string(const JsonPointer& p) const {
  if (!has(p) || root_.at(p).is_null()) return std::nullopt;
  return require_string(p);
}

std::string JsoncDocument::string_or(const JsonPointer& p, std::string fallback) const {
  auto v = optional_string(p);
  return v ? *v : std::move(fallback);
}

bool JsoncDocument::require_bool(const JsonPointer& p) const {
  const json& v = at(p);
  if (!v.is_boolean()) fail(p, fmt::format("expected true or false, found {} {}", v.type_name(), show(v)));
  return v.get<bool>();
}

bool JsoncDocument::bool_or(const JsonPointer& p, bool fallback) const {
  if (!has(p)) return fallback;
  return require_bool(p);
}

std::string JsoncDocument::require_enum(const JsonPointer& p, const std::vector<std::string>& allowed) const {
  std::string v = require_string(p);
  if (std::find(allowed.begin(), allowed.end(), v) == allowed.end())
    fail(p, fmt::format("\"{}\" is not allowed; expected one of: {}", v, join(allowed)));
  return v;
}

std::string JsoncDocument::enum_or(const JsonPointer& p, std::string fallback,
                                   const std::vector<std::string>& allowed) const {
  if (!has(p)) return fallback;
  return require_enum(p, allowed);
}

std::vector<std::string> JsoncDocument::string_list_or_empty(const JsonPointer& p) const {
  std::vector<std::string> out;
  if (!has(p)) return out;
  const json& arr = require_array(p);
  for (std::size_t i = 0; i < arr.size(); ++i) out.push_back(require_string(p / i));
  return out;
}

void JsoncDocument::check_keys(const JsonPointer& p, const std::vector<std::string>& allowed) const {
  if (!has(p)) return;
  const json& obj = require_object(p);
  for (const auto& [key, value] : obj.items()) {
    if (std::find(allowed.begin(), allowed.end(), key) != allowed.end()) continue;
    std::string hint;
    std::size_t best = 3;
    for (const auto& a : allowed) {
      std::size_t d = edit_distance(key, a);
      if (d < best) { best = d; hint = fmt::format(" (did you mean \"{}\"?)", a); }
    }
    fail(p / key, fmt::format("unknown key \"{}\"{}; allowed keys: {}", key, hint, join(allowed)));
  }
}

}  // namespace echoline::drivers
