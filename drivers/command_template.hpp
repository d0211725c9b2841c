// Command templates from instrument profiles: SCPI text with typed placeholders such as
// "FREQ:CW {frequency_hz}". Owns the fixed placeholder table, the operations each role knows
// and which placeholders each allows, and locale-independent expansion. Pure; thread-safe.
#pragma once

#include <cstdint>
#include <initializer_list>
#include <string>
#include <string_view>
#include <variant>
#include <vector>

#include "drivers/result.hpp"

namespace echoline::drivers {

// The fixed placeholder table. Each name has one type and one wire spelling:
//   frequency_hz  number, Hz        shortest round-trip decimal ("915000000", "2400000000.5")
//   power_dbm     number, dBm       e.g. "-10.5"
//   db            number, dB        attenuation, gains
//   seconds       number, s         sweep time
//   count         integer           points, averages
//   state         bool              "ON" | "OFF"
//   position      token             switch position token from the profile /switch/positions (e.g. "1")
//   format        token             "ASC" | "REAL,32"   (FORMat[:DATA])
//   byte_order    token             "NORM" | "SWAP"     (FORMat:BORDer)
//   mode          token             "CW" | "SWE"        (FREQuency:MODE)
// Vendor tokens (a trace's max-hold mode, say) are never compiled in: such settings are
// separate operations whose whole text is in the profile (max_hold_on, max_hold_off).
enum class PlaceholderType { number, integer, boolean, token };
struct PlaceholderInfo { std::string_view name; PlaceholderType type; std::string_view unit; };
const std::vector<PlaceholderInfo>& placeholder_table();

// What one operation is: its role, whether it is a query (reply expected), whether the profile
// must define it, and which placeholders it may use (at least one of them when the list is non-empty).
// A required operation with may_be_absent can be declared absent in a profile (`"set_vbw": null`)
// for an instrument that lacks it; recipes that need it are then refused (recipe_check).
struct OperationSpec {
  std::string_view name;
  std::string_view role;      // "source" | "receiver" | "switch"
  bool query = false;
  bool required = false;
  std::vector<std::string_view> placeholders;
  bool may_be_absent = false;
};
const std::vector<OperationSpec>& operation_table();
const OperationSpec* find_operation(std::string_view role, std::string_view operation);

// One argument to expand(): placeholder name and value (double for numbers, int64 for counts,
// bool for state, string for tokens).
struct TemplateArg {
  std::string_view name;
  std::variant<double, std::int64_t, bool, std::string> value;
};

// Formats a number for the wire: shortest text that round-trips, '.' decimal point, any locale.
// NaN and infinities are refused by expand() before this is reached.
std::string format_wire_number(double value);

class CommandTemplate {
 public:
  CommandTemplate() = default;
  // Parses and checks `text` for `operation` of `role`: known operation, known placeholders,
  // allowed for that operation, "{{" / "}}" for literal braces, no line terminators, '?' present
  // exactly when the operation is a query. Error message names the problem (no location: the
  // caller adds file, line and key).
  static Result<CommandTemplate> parse(std::string_view role, std::string_view operation, std::string_view text);

  // Fills the placeholders. Error (invalid_argument) when an argument is missing, of the wrong
  // type, not finite, or a token holds a character that would break the message (; \n " etc.).
  Result<std::string> expand(std::initializer_list<TemplateArg> args) const;
  Result<std::string> expand(const std::vector<TemplateArg>& args) const;

  const std::string& text() const { return text_; }
  const std::string& operation() const { return operation_; }
  bool is_query() const { return query_; }
  // Placeholder names used, in order of appearance (repeats kept).
  std::vector<std::string> placeholders() const;

 private:
  struct Piece { bool placeholder; std::string text; };   // literal text or placeholder name
  std::string text_, operation_;
  bool query_ = false;
  std::vector<Piece> pieces_;
};

}  // namespace echoline::drivers
