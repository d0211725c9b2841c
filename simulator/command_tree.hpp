// SCPI command tree of one simulated instrument: commands declared as pattern strings with
// handlers, header matching (short/long forms, optional nodes, numeric suffixes), the
// SCPI-99 current-path rule across ';', and running a whole program message.
// Single-threaded (the owning instrument's thread); pure: the clock comes in as an argument.
#pragma once

#include <functional>
#include <optional>
#include <variant>
#include <string>
#include <string_view>
#include <vector>

#include "simulator/instrument.hpp"
#include "simulator/scpi_parser.hpp"
#include "simulator/status_model.hpp"

namespace echoline::sim {

// What a handler sees.
struct Call {
  const MessageUnit& unit;
  bool query = false;
  std::vector<int> suffixes;   // one per suffix-capable pattern node, in order (default 1)
  double now_s = 0;

  const std::vector<Parameter>& params() const { return unit.params; }
  int suffix(std::size_t i = 0) const { return i < suffixes.size() ? suffixes[i] : 1; }
};

// What a handler returns: nothing, a reply, or an error for the queue.
struct Outcome {
  std::optional<std::string> reply;
  double delay_s = 0;
  std::optional<ScpiError> error;

  static Outcome done() { return {}; }
  static Outcome text(std::string t, double delay_s = 0) { Outcome o; o.reply = std::move(t); o.delay_s = delay_s; return o; }
  static Outcome fail(ScpiError e) { Outcome o; o.error = std::move(e); return o; }
  static Outcome fail(int code, std::string detail) { return fail(ScpiError{code, std::move(detail)}); }
};

using Handler = std::function<Outcome(const Call&)>;

// -109 when fewer than `min` parameters, -108 when more than `max`.
std::optional<ScpiError> check_param_count(const Call& call, std::size_t min, std::size_t max);

class CommandTree {
 public:
  // Pattern grammar (SCPI-99 Vol 1 ch. 6 notation):
  //   nodes separated by ':'; the uppercase part of a mnemonic is its short form;
  //   [node] is optional, a|b are alternatives ("BANDwidth|BWIDth", "[:CW|:FIXed]");
  //   node{lo:hi} takes a numeric suffix in lo..hi, default 1 ("MARKer{1:4}");
  //   ends in "?" = query only, "[?]" = command and query, neither = command only;
  //   "*IDN?" style for common commands.
  // Examples: "[SOURce:]FREQuency[:CW|:FIXed][?]", "CALCulate:MARKer{1:4}:X?".
  // Throws std::invalid_argument on a malformed pattern (a programming error, found at start-up).
  void add(std::string_view pattern, Handler handler);

  // Runs one program message: parse errors and handler errors go to `status`; returns one
  // Reply per answered query. A header or syntax error ends the message (the rest is
  // discarded: the parser has lost its place); a parameter/execution error does not.
  std::vector<Reply> execute(std::string_view message, StatusModel& status, double now_s);

 private:
  struct Alternative { std::string long_form, short_form; bool has_suffix = false; int lo = 1, hi = 1; };
  struct Node { bool optional = false; std::vector<Alternative> alternatives; };
  struct Command { std::string pattern; bool common = false; std::string common_name;
                   std::vector<Node> nodes; bool allows_query = false; bool allows_set = true; Handler handler; };

  // Finds the command for a unit; fills suffixes. Error -113 / -114.
  std::variant<const Command*, ScpiError> resolve(const MessageUnit& unit, const std::vector<Keyword>& full,
                                                  std::vector<int>& suffixes) const;

  std::vector<Command> commands_;
};

}  // namespace echoline::sim

namespace echoline::sim {

// Handler building blocks for the usual setting shapes.
//
// Numeric setting "X <value>" / "X?" / "X? MIN|MAX|DEF". A value outside limits.min..max is
// -222 and leaves the setting unchanged (SCPI-99 Vol 2 §21.8, -222 Data out of range).
// `apply` may refuse with its own error (e.g. -221 Settings conflict).
Outcome numeric_setting(const Call& call, Unit unit, const NumericLimits& limits, double current,
                        const std::function<std::optional<ScpiError>(double)>& apply);
// Boolean setting "X ON|OFF|1|0" / "X?" (reply "1" or "0", SCPI-99 Vol 1 §7.3).
Outcome bool_setting(const Call& call, bool current, const std::function<void(bool)>& apply);
// Character-data setting "X <choice>" / "X?" (reply the short form, SCPI-99 Vol 1 §7.4.1).
Outcome choice_setting(const Call& call, const std::vector<std::string_view>& choices, std::size_t current,
                       const std::function<std::optional<ScpiError>(std::size_t)>& apply);

}  // namespace echoline::sim
