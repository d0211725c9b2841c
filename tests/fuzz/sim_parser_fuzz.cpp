// Fuzz target for the simulator's SCPI side: the program-message parser (simulator/scpi_parser.hpp)
// and the whole path through a simulated instrument (command tree, status model, handlers).
// Input: byte 0 picks the instrument (source, receiver, switch, or a bare tree with a 4-entry
// error queue); the rest is split at '\n' into program messages run in order on one World.
// Invariants: no crash or exception; the error queue never exceeds its capacity and always
// drains to 0,"No error"; at most one reply per '?'; reply delays are finite and >= 0.
// Single-threaded; every input builds a fresh World.
#include <algorithm>
#include <cmath>
#include <cstdint>
#include <memory>
#include <string>
#include <vector>

#include <nlohmann/json.hpp>

#include "simulator/command_tree.hpp"
#include "simulator/instrument.hpp"
#include "simulator/scpi_parser.hpp"
#include "simulator/status_model.hpp"
#include "tests/fuzz/fuzz_check.hpp"

namespace sim = echoline::sim;

namespace {

constexpr std::size_t kMaxMessages = 32;   // keeps one input fast; sequences still reach state

// Parser-level: split, parse each unit, convert each parameter every way an instrument might.
void fuzz_parser(std::string_view message) {
  auto units = sim::split_units(message);
  if (auto* e = std::get_if<sim::ScpiError>(&units)) {
    FUZZ_CHECK(e->code <= -100 && e->code >= -199, "split_units error is not a command error (-1xx)");
    return;
  }
  for (std::string_view unit_text : std::get<0>(units)) {
    auto unit = sim::parse_unit(unit_text);
    if (auto* e = std::get_if<sim::ScpiError>(&unit)) {
      // SCPI-1999 Vol 2 §21.8.9: parse failures are command errors, -100..-199.
      FUZZ_CHECK(e->code <= -100 && e->code >= -199, "parse_unit error is not a command error: " + std::to_string(e->code));
      continue;
    }
    const auto& u = std::get<sim::MessageUnit>(unit);
    FUZZ_CHECK(u.common == !u.common_name.empty(), "common flag and common_name disagree");
    for (const auto& p : u.params) {
      for (auto unit_kind : {sim::Unit::none, sim::Unit::hertz, sim::Unit::seconds, sim::Unit::dbm, sim::Unit::db}) {
        auto n = sim::to_number(p, unit_kind, sim::NumericLimits{-1e9, 1e9, 1});
        if (auto* e = std::get_if<sim::ScpiError>(&n)) FUZZ_CHECK(e->code < 0, "to_number error code not negative");
      }
      (void)sim::to_bool(p);
      (void)sim::to_choice(p, {"ASCii", "REAL", "NORMal", "SWAPped"});
      if (p.kind == sim::Parameter::Kind::decimal) {
        // format_nr3 output is itself valid NRf that parses back to the same number.
        const double v = p.number;
        if (std::isfinite(v)) {
          auto again = sim::parse_unit("X " + sim::format_nr3(v));
          FUZZ_CHECK(std::holds_alternative<sim::MessageUnit>(again), "format_nr3 output does not parse");
          const auto& back = std::get<sim::MessageUnit>(again);
          FUZZ_CHECK(back.params.size() == 1 && back.params[0].number == v, "format_nr3 does not round-trip");
        }
      }
    }
  }
}

void check_replies(std::string_view message, const std::vector<sim::Reply>& replies) {
  const auto queries = static_cast<std::size_t>(std::count(message.begin(), message.end(), '?'));
  FUZZ_CHECK(replies.size() <= queries, "more replies than queries in the message");
  for (const auto& r : replies) {
    FUZZ_CHECK(std::isfinite(r.delay_s) && r.delay_s >= 0, "reply delay is negative or not finite");
  }
}

// SCPI-1999 Vol 2 §21.8: the queue holds at most its capacity; reading it empties it in at most
// capacity reads, then "0,\"No error\"".
void check_queue_drains(sim::SimInstrument& inst) {
  const std::size_t capacity = sim::StatusModel::kDefaultQueueCapacity;
  auto count = inst.handle("SYST:ERR:COUN?");
  FUZZ_CHECK(count.size() == 1, "SYST:ERR:COUN? gave no reply");
  FUZZ_CHECK(std::stol(count[0].text) <= static_cast<long>(capacity), "error queue over capacity: " + count[0].text);
  for (std::size_t i = 0; i <= capacity; ++i) {
    auto r = inst.handle("SYST:ERR?");
    FUZZ_CHECK(r.size() == 1, "SYST:ERR? gave no reply");
    if (r[0].text.rfind("0,", 0) == 0) return;
  }
  FUZZ_CHECK(false, "error queue did not drain within its capacity");
}

std::vector<std::string_view> split_lines(std::string_view text) {
  std::vector<std::string_view> lines;
  while (!text.empty() && lines.size() < kMaxMessages) {
    auto nl = text.find('\n');
    lines.push_back(text.substr(0, nl));
    if (nl == std::string_view::npos) break;
    text.remove_prefix(nl + 1);
  }
  return lines;
}

void fuzz_bare_tree(const std::vector<std::string_view>& messages) {
  constexpr std::size_t kCapacity = 4;
  sim::StatusModel status(kCapacity);
  sim::CommandTree tree;
  sim::add_common_commands(tree, status, {[] { return std::string("Echoline,FUZZ,0,1.0"); }, [] {}});
  double setting = 1;
  tree.add("[SOURce:]FREQuency[:CW|:FIXed][?]", [&](const sim::Call& c) {
    return sim::numeric_setting(c, sim::Unit::hertz, {1e3, 1e9, 1e6}, setting, [&](double v) {
      setting = v;
      return std::optional<sim::ScpiError>{};
    });
  });
  tree.add("CALCulate:MARKer{1:4}:X?", [](const sim::Call& c) { return sim::Outcome::text(std::to_string(c.suffix())); });
  double now = 0;
  for (auto m : messages) {
    status.advance(now);
    auto replies = tree.execute(m, status, now);
    check_replies(m, replies);
    FUZZ_CHECK(status.error_count() <= kCapacity, "bare tree: error queue over capacity");
    now += 0.5;
  }
  for (std::size_t i = 0; i <= kCapacity; ++i) {
    if (status.pop_error().rfind("0,", 0) == 0) return;
  }
  FUZZ_CHECK(false, "bare tree: error queue did not drain");
}

}  // namespace

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  if (size == 0) return 0;
  const int pick = data[0] % 4;
  const auto messages = split_lines(echoline::fuzz::as_text(data + 1, size - 1));
  for (auto m : messages) fuzz_parser(m);

  if (pick == 3) {
    fuzz_bare_tree(messages);
    return 0;
  }
  sim::World world;
  const nlohmann::json config = {{"seed", 1}};
  std::unique_ptr<sim::SimInstrument> inst;
  if (pick == 0) inst = sim::make_source_instrument(world, config);
  else if (pick == 1) inst = sim::make_receiver_instrument(world, config);
  else inst = sim::make_switch_instrument(world, config);
  for (auto m : messages) {
    auto replies = inst->handle(m);
    check_replies(m, replies);
    world.now_s += 0.5;
  }
  world.now_s += 1e6;   // past any pending sweep
  check_queue_drains(*inst);
  return 0;
}
