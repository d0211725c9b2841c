// The value a finished (or aborted) run produces: everything the store, reports and console need.
// Also the calibration record every run refers to. Data only; pure functions fill these in.
#pragma once

#include <limits>
#include <map>
#include <optional>
#include <string>
#include <vector>

#include "daemon/core/budget_types.hpp"

namespace echoline::core {

// One raw reading from the receiver.
struct Reading {
  double frequency_hz = 0;
  double raw_dbm = 0;
};

// One calibrated point. Bounds are the true return loss interval from directivity and
// source match (worst = lowest RL, best = highest RL; best may be +inf).
struct PointResult {
  double frequency_hz = 0;
  double raw_dbm = 0;
  double return_loss_db = 0;
  double return_loss_worst_db = 0;
  double return_loss_best_db = 0;
  // The same point read through the offset line (recipes with the offset pair); NaN otherwise.
  double offset_raw_dbm = std::numeric_limits<double>::quiet_NaN();
};

enum class Verdict { pass, fail, inconclusive, aborted };
enum class FailureClass { none, no_response, tuned_low, tuned_high, shallow, out_of_mask };

const char* to_string(Verdict v);       // "pass", "fail", "inconclusive", "aborted"
const char* to_string(FailureClass c);  // "", "no-response", "tuned-low", "tuned-high", "shallow", "out-of-mask"

struct Metrics {
  std::optional<double> resonance_hz;     // parabola-refined RL maximum
  double depth_db = 0;                    // RL at resonance
  std::optional<double> bandwidth_hz;     // where RL >= threshold around resonance
  std::optional<double> band_low_hz;
  std::optional<double> band_high_hz;
  double min_margin_db = 0;               // worst limit margin (measured RL - limit)
  double vswr_at_resonance = 0;
  double mismatch_loss_db = 0;            // at resonance
  double directivity_db = 0;              // effective directivity (minimum over the band)
  // Where the TRUE resonance can lie given the directivity / source-match bounds (analysis.cpp,
  // resonance_interval). Absent on a side where the interval reaches the sweep edge (the true
  // resonance may lie beyond the sweep) and when there is no resonance.
  std::optional<double> resonance_low_hz;
  std::optional<double> resonance_high_hz;
  // Which interval decided the resonance: "rigorous" (every point's bounds, any error phase),
  // "shift-bound" (smooth error terms over the dip; its assumptions checked), "offset-pair" (the
  // offset pair's sum, MEASUREMENT.md §12.1), "fit" (the dip
  // fit passed its goodness-of-fit test and narrowed the interval), or "" (none).
  std::string resonance_interval_kind;
  // The dip fit (daemon/core/dip_fit.hpp), when it was tried: the model that fitted best ("" when
  // none passed), why it was refused, and the unit's own depth and bandwidth with their
  // intervals. Computed when judging; not kept by the run store (re-judging recomputes them).
  std::string fit_model;
  std::string fit_refused;
  std::optional<double> fit_resonance_hz, fit_depth_db, fit_depth_low_db, fit_depth_high_db;
  std::optional<double> fit_bandwidth_hz, fit_bandwidth_low_hz, fit_bandwidth_high_hz;
  // The rigorous interval alone, for comparison (absent on a side open at the sweep's end).
  std::optional<double> rigorous_low_hz, rigorous_high_hz;
};

struct TrimAdvice {
  double element_length_mm = 0;   // as given by the recipe
  double change_mm = 0;           // negative: cut this much; positive: element too short
  double measured_hz = 0;
  double target_hz = 0;
  std::string text;               // "cut 4.2 mm from the element"
};

struct Timings {
  double total_s = 0;
  double sweep_s = 0;
  double analysis_s = 0;
};

struct RecipeRef {
  std::string name;
  std::string version;
  std::string content_hash;
};

struct RunResult {
  std::string run_id;            // unique, e.g. "20261201T221500Z-0001-ab12"
  std::string serial;
  std::string lot;
  std::string station;
  std::string operator_name;
  RecipeRef recipe;
  std::string decision_rule;     // "simple" | "guarded"
  std::map<std::string, std::string> instruments;  // role -> *IDN? reply
  std::string started_utc;       // ISO 8601, e.g. 2026-12-01T22:15:00.123Z
  std::string ended_utc;
  std::optional<double> temperature_c;
  std::string calibration_id;
  bool retest = false;
  Verdict verdict = Verdict::aborted;
  FailureClass failure_class = FailureClass::none;
  std::string reason;            // plain words, for the operator
  Metrics metrics;
  std::optional<TrimAdvice> trim;
  std::vector<PointResult> points;
  Timings timings;
  std::string software;          // "echolined <version> (<commit>)" that judged it
};

// A stored run's raw readings, for judging it again: the direct sweep, and the sweep through
// the offset line (empty when the run has no finite second reading at every point).
std::vector<Reading> direct_readings(const RunResult& run);
std::vector<Reading> offset_readings(const RunResult& run);

struct CalibrationRecord {
  std::string id;
  std::string created_utc;
  RecipeRef recipe;
  std::string station;
  std::map<std::string, std::string> instruments;
  std::optional<double> temperature_c;
  std::map<std::string, std::vector<Reading>> traces;   // "OPEN", "SHORT", "LOAD" -> raw
  std::vector<double> reference_dbm;                    // per point, |Γ|=1 reference
  std::vector<double> directivity_db;                   // per point, reference - LOAD
  double min_directivity_db = 0;
  double noise_margin_db = 0;                           // LOAD above the noise floor (estimate)
  std::vector<std::string> warnings;                    // sanity checks that passed with remarks
  std::vector<std::string> errors;                      // why the record is not valid (empty when valid)
  bool valid = false;                                   // all sanity checks passed
  // Expiry as configured at creation (from the recipe's policy).
  double max_age_s = 0;
  int max_units = 0;
  double max_temperature_change_c = 0;
  int units_since = 0;                                  // maintained by the service
  int units_since_check = 0;                            // ... since the last check standard (service)
  // The calibration kit the standards came from, and the uncertainty budget built from the
  // standards' readings, their repeats and the kit (uncertainty.hpp). An empty budget (records
  // made before budgets existed) makes the record unusable for judging: calibrate again.
  std::string kit_identity;
  std::string kit_serial;
  UncertaintyBudget budget;
  std::string software;                                 // "echolined <version> (<commit>)"
};

}  // namespace echoline::core
