// Final verdicts scored against the truth: the true return loss against each stored point's
// [worst, best] bounds, escapes (pass while the truth misses a limit), false rejects (fail while
// the truth meets every limit), inconclusives with their reasons grouped, and trim advice on a
// unit whose defect is not its length. Pure; thread-safe.
#pragma once

#include <map>
#include <string>
#include <vector>

#include "daemon/core/recipe.hpp"
#include "tests/score/unit_record.hpp"

namespace echoline::score {

// Where a resonance counts as "in the band": the recipe's resonance window when it has one,
// else the span its mask covers (lowest start to highest stop), as the daemon's diagnosis uses.
struct TuningBand {
  double low_hz = 0;
  double high_hz = 0;
};
TuningBand tuning_band(const core::Recipe& recipe);

// Does the truth meet every mask segment on the grid and, when the recipe has one, the
// resonance window (true f0)? `why` names the first limit the truth misses.
bool truth_meets_limits(const UnitTruth& truth, const core::Recipe& recipe, std::string* why);

struct BoundsFigures {
  long points = 0;                  // stored points compared
  long outside = 0;                 // true RL < worst or > best
  double largest_excursion_db = 0;  // how far the truth lay outside, largest
  std::string largest_at;           // "SERIAL at 902.0 MHz: true 9.81 dB, bounds [9.90, 12.3] dB"
  std::vector<std::string> runs;    // one line per run with a point outside (serial, count, worst)
};

struct VerdictFigures {
  int units = 0;                           // final runs scored
  std::map<std::string, int> verdicts;     // final verdict -> units
  BoundsFigures bounds;                    // judged runs, intermittent units excluded
  BoundsFigures bounds_intermittent;       // intermittent units only: their truth is the good state
  std::vector<std::string> escapes;        // "SERIAL (defect): why"
  std::vector<std::string> false_rejects;  // intermittent units excluded (their failure is real)
  std::vector<std::string> intermittent_failed;   // failed intermittent units, for the record
  int inconclusive = 0;
  int inconclusive_systematic = 0;   // ... whose reason says no retest on this bench can settle them
  std::map<std::string, int> inconclusive_reasons;   // first 60 characters of the reason -> units
  std::vector<std::string> inconclusive_units;       // "SERIAL (defect, true f0): reason"
  int trim_advised = 0;                              // final runs with trim advice
  std::vector<std::string> trim_on_non_length;       // advice where the defect is not the length
};

// The first `n` characters (UTF-8 code points) of `text`.
std::string first_characters(const std::string& text, std::size_t n);

VerdictFigures score_verdicts(const std::vector<UnitRecord>& units, const core::Recipe& recipe);

}  // namespace echoline::score
