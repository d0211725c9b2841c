// SCPI program-message parser for the simulated instruments (IEEE 488.2 ch. 7, SCPI-1999
// Vol 1 ch. 6-7): splits a message into message units, parses headers and parameters, and
// converts parameters (numbers with suffix multipliers, booleans, character data).
// Pure functions, no state: callable from any thread. Errors carry the SCPI error number.
#pragma once

#include <optional>
#include <string>
#include <string_view>
#include <variant>
#include <vector>

namespace echoline::sim {

// A parse or conversion failure: the standard SCPI error number (e.g. -113) and a detail
// that names the offending text ("FREQU").
struct ScpiError {
  int code = 0;
  std::string detail;
};

template <typename T>
using ScpiResult = std::variant<T, ScpiError>;

// One header keyword as received: the alphabetic mnemonic (uppercased) and its numeric suffix.
struct Keyword {
  std::string mnemonic;            // "MARKER" from "Marker2"
  std::optional<int> suffix;       // 2 from "Marker2"; nullopt when none was typed
};

// One parameter (IEEE 488.2 §7.7 program data).
struct Parameter {
  enum class Kind { decimal, nondecimal, character, string, block, channel_list };
  Kind kind = Kind::decimal;
  std::string text;                // as typed (character data uppercased; string/block: content)
  double number = 0;               // decimal / nondecimal: the mantissa*10^exp (no multiplier)
  std::string suffix;              // decimal: the suffix as typed, uppercased ("MHZ"), or ""
  std::vector<int> channels;       // channel_list: "(@1,3:5)" -> 1,3,4,5
};

// One program message unit: header + parameters.
struct MessageUnit {
  bool common = false;             // "*IDN?" style
  bool absolute = false;           // header started with ':' (path reset to root)
  bool query = false;              // header ended with '?'
  std::string common_name;         // "*IDN" (uppercase) when common
  std::vector<Keyword> keywords;   // program header nodes when not common
  std::vector<Parameter> params;
  std::string header_text;         // header as typed, for error details
};

// Splits a program message at ';' outside strings and blocks. A unit that is only whitespace
// is skipped. Returns the raw unit texts; -151/-161 when a string/block runs off the end.
ScpiResult<std::vector<std::string_view>> split_units(std::string_view message);

// Parses one message unit (text between separators).
// Errors: -101 invalid character, -102 syntax error, -103 invalid separator, -112 mnemonic
// too long, -120 numeric data error, -151 invalid string data, -161 invalid block data,
// -170 expression (channel list) error.
ScpiResult<MessageUnit> parse_unit(std::string_view text);

// IEEE 488.2 §7.4.1 (from memory): 0x00-0x09 and 0x0B-0x20 are whitespace (CR before LF is).
bool is_scpi_whitespace(char c);

// Unit expected by a numeric parameter.
enum class Unit { none, hertz, seconds, dbm, db };

// Numeric limits for MINimum / MAXimum / DEFault.
struct NumericLimits {
  double min = 0;
  double max = 0;
  double def = 0;
};

// Numeric parameter -> value in base units. Accepts NRf, #H/#Q/#B, MIN/MAX/DEF,
// INF/NINF/NAN, and a suffix with optional multiplier (IEEE 488.2 Table 7-1; MHZ = mega).
// Errors: -104 data type error (string, block...), -131 invalid suffix, -138 suffix not
// allowed (Unit::none), -141 invalid character data.
ScpiResult<double> to_number(const Parameter& p, Unit unit, const NumericLimits& limits);

// Boolean: ON | OFF | numeric (rounded, non-zero = ON). -224 for other character data, -104 for
// strings and blocks.
ScpiResult<bool> to_bool(const Parameter& p);

// Character data against a list of mnemonics in mixed case ("ASCii"): returns the index.
// Short or long form, case-insensitive. -224 when none matches, -104 when not character data.
ScpiResult<std::size_t> to_choice(const Parameter& p, const std::vector<std::string_view>& choices);

// A mixed-case mnemonic ("FREQuency") -> its long form "FREQUENCY" and short form "FREQ".
struct MnemonicForms {
  std::string long_form;
  std::string short_form;
};
MnemonicForms mnemonic_forms(std::string_view mixed_case);

// true when `typed` (any case) equals the short or the long form of `mixed_case`.
bool mnemonic_matches(std::string_view typed, std::string_view mixed_case);

// Number as NR3 text, locale-independent and round-tripping: "9.15E+08", "-1.0E+01".
std::string format_nr3(double value);

}  // namespace echoline::sim
