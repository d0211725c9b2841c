// What the operator does with a unit after its verdict ("put it in the PASS tray", ...), and the
// plain-words summary of a run for the console. Pure; thread-safe.
#pragma once

#include <optional>
#include <string>

#include <nlohmann/json.hpp>

namespace echoline::client {

struct UnitAdvice {
  std::string action;      // one sentence, imperative
  std::string detail;      // optional second line ("" when none)
};

// `run`: the API's run object (API.md). `inconclusive_before`: this serial was already
// inconclusive earlier in this session (then the unit goes to engineering).
UnitAdvice advise(const nlohmann::json& run, bool inconclusive_before);

// An aborted run whose reason tells of instrument trouble (the instrument named, a timeout, no
// reply): the unit was not judged because of the instruments.
bool aborted_by_instruments(const nlohmann::json& run);

// "resonance 915.3 MHz, depth 24.1 dB, VSWR 1.13 at resonance" (fields that are null are left out).
std::string metrics_line(const nlohmann::json& run);

}  // namespace echoline::client
