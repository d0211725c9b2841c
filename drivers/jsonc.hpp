// JSON-with-comments documents for configuration files: parsing (// and /* */ comments, no
// trailing commas, no duplicate keys), the source line of every key and array element, and
// typed accessors that throw ConfigError naming file, line and key. Immutable once loaded;
// safe to read from several threads.
#pragma once

#include <cstdint>
#include <filesystem>
#include <map>
#include <optional>
#include <string>
#include <string_view>
#include <vector>

#include <nlohmann/json.hpp>

#include "drivers/config_error.hpp"

namespace echoline::drivers {

using JsonPointer = nlohmann::json::json_pointer;

// Key paths in messages are JSON pointers ("/commands/set_frequency", "/instruments/0/address");
// the root is written "/".
std::string key_path(const JsonPointer& at);

class JsoncDocument {
 public:
  // Reads and parses a file. Throws ConfigError (line 0 when the file cannot be read).
  static JsoncDocument load(const std::filesystem::path& file);
  // Parses text; file_name is used in messages only. Throws ConfigError.
  static JsoncDocument parse(std::string text, std::string file_name);

  const nlohmann::json& root() const { return root_; }
  const std::string& file() const { return file_; }

  // 1-based line where the key (for object members) or the value (array elements, root) starts.
  // For a pointer that is not in the document: the line of its nearest existing ancestor.
  int line_of(const JsonPointer& at) const;

  // Throws ConfigError at the line of `at` with key_path(at).
  [[noreturn]] void fail(const JsonPointer& at, const std::string& message) const;

  // ---- typed access; every getter throws ConfigError with file, line and key ----
  bool has(const JsonPointer& at) const;
  const nlohmann::json& at(const JsonPointer& at) const;   // REQUIRES: present (else ConfigError "missing")
  const nlohmann::json& require_object(const JsonPointer& at) const;
  const nlohmann::json& require_array(const JsonPointer& at) const;

  // `unit` appears in messages ("expected a number in dBm"); pass "" for unitless values.
  double require_number(const JsonPointer& at, std::string_view unit) const;
  std::optional<double> optional_number(const JsonPointer& at, std::string_view unit) const;
  double number_or(const JsonPointer& at, double fallback, std::string_view unit) const;
  // Like number_or / require_number, and the value must lie within [min, max].
  double number_in(const JsonPointer& at, double fallback, double min, double max, std::string_view unit) const;

  std::int64_t require_integer(const JsonPointer& at) const;
  std::int64_t integer_or(const JsonPointer& at, std::int64_t fallback) const;

  std::string require_string(const JsonPointer& at) const;
  std::optional<std::string> optional_string(const JsonPointer& at) const;
  std::string string_or(const JsonPointer& at, std::string fallback) const;

  bool require_bool(const JsonPointer& at) const;
  bool bool_or(const JsonPointer& at, bool fallback) const;

  // A string among `allowed` (exact, case-sensitive); the message lists the allowed values.
  std::string require_enum(const JsonPointer& at, const std::vector<std::string>& allowed) const;
  std::string enum_or(const JsonPointer& at, std::string fallback, const std::vector<std::string>& allowed) const;

  // A list of strings (absent -> empty).
  std::vector<std::string> string_list_or_empty(const JsonPointer& at) const;

  // The object at `at` may hold only `allowed` keys; an unknown key is an error at its own line
  // naming it and the allowed keys (catches typos). An absent object passes.
  void check_keys(const JsonPointer& at, const std::vector<std::string>& allowed) const;

 private:
  JsoncDocument() = default;
  nlohmann::json root_;
  std::string file_;
  std::map<std::string, int> lines_;   // JSON pointer string -> line
};

}  // namespace echoline::drivers
