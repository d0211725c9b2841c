// Scalar OPEN/SHORT/LOAD calibration: builds the |Γ| = 1 reference and the effective
// directivity per point from raw standard traces, runs the sanity checks, and says when a
// calibration is due. Pure functions of values (no clock, no I/O); thread-safe.
#pragma once

#include <map>
#include <optional>
#include <string>
#include <vector>

#include "daemon/core/recipe.hpp"
#include "daemon/core/recipe_check.hpp"
#include "daemon/core/run_result.hpp"

namespace echoline::core {

// Sanity-check thresholds (common practice, no source; see calibration.cpp for the reasoning).
struct CalibrationLimits {
  double level_tolerance_db = 6;      // OPEN/SHORT within this of the expected level
  double max_open_short_spread_db = 3;
  double min_directivity_db = 20;     // LOAD depth below this -> not valid
  double min_noise_margin_db = 6;     // LOAD this far above the noise floor, else a warning
};

// traces: "OPEN", "LOAD" and (when recipe.calibration.use_short) "SHORT", each one reading per
// plan point (plan_frequencies(recipe)), in plan order; with recipe.calibration.use_mismatch also
// one trace per mismatch standard of station.kit, under its name (e.g. "MISMATCH-A"). The record
// keeps every trace, and its budget the kit's definitions of the mismatch standards measured.
// reference = (P_open + P_short)/2 in dB per point (P_open alone without SHORT, with a warning);
// directivity = reference − P_load. Problems that make the record unusable set valid = false and
// are listed in `errors`; remarks go to `warnings`. Never throws.
CalibrationRecord build_calibration(const Recipe& recipe,
                                    const std::map<std::string, std::vector<Reading>>& traces,
                                    const StationCapability& station, std::string id,
                                    std::string created_utc,
                                    const CalibrationLimits& limits = {});

struct CalibrationState {
  bool due = false;
  std::string reason;  // why it is due (plain words), or "" when not due
};

// Due when: no record; record not valid; made for another recipe or frequency plan; older than
// its max age; max units reached (cal->units_since); temperature changed beyond the limit (when
// both the record's and the current temperature are known); a fast-capture record whose budget
// bounds a smaller frequency offset than the station's capture now allows (frequency_offset_hz,
// StationCapability; negative = not checked), e.g. after the start-pulse cable was removed; and,
// when `station` is given, a budget made for a better test-port source match or a shorter
// test-port cable than the station config now states (the bounds would be too narrow).
CalibrationState calibration_due(const CalibrationRecord* cal, const Recipe& recipe,
                                 double now_unix_s, double created_unix_s,
                                 std::optional<double> temperature_c, double frequency_offset_hz = -1,
                                 const StationCapability* station = nullptr);

// Compares a re-measured check standard with the calibration's own trace of it, point by point
// in dB. True when any point moved more than limit_db, or the traces cannot be compared; `why`
// (optional) gets the explanation, naming the standard and the frequency. The OPEN (or SHORT)
// is the steadier check: a LOAD sits near the bottom of the range, where noise alone can move
// its reading by a dB or more.
bool check_standard_drifted(const CalibrationRecord& cal, const std::string& standard,
                            const std::vector<Reading>& remeasured, double limit_db,
                            std::string* why);

// A calibration as it was when it judged its runs: one that a drifted check standard later
// invalidated ("invalidated at ..." errors only) was valid then, since the runs measured with it
// came before the check. Any other error keeps it invalid. For re-judging stored runs.
CalibrationRecord as_when_used(CalibrationRecord cal);

}  // namespace echoline::core
