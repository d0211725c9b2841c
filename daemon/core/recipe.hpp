// The sweep recipe an engineer writes (config/recipes/*.jsonc), as plain values.
// Loading and checking live in recipe_loader.hpp / recipe_check.hpp; this header is data only.
// Units are in the field names: _hz, _dbm, _db, _s, _mm. Thread-safe: immutable once loaded.
#pragma once

#include <map>
#include <optional>
#include <string>
#include <vector>

namespace echoline::core {

// One frequency segment: start..stop inclusive, either `points` or `step_hz` given in the file.
struct Segment {
  double start_hz = 0;
  double stop_hz = 0;
  int points = 0;  // resolved point count (from points or step_hz)
};

struct SourceSettings {
  double power_dbm = -10;   // CW level at the source output
  double settle_s = 0.0;    // wait after each frequency change before triggering
};

struct ReceiverSettings {
  double rbw_hz = 10e3;
  double vbw_hz = 0;         // 0 = same as RBW (or none, on a receiver without VBW)
  double span_hz = 100e3;    // span around each point (0 = zero span)
  std::optional<double> reference_level_dbm;   // none = left to the instrument
  double attenuation_db = -1; // -1 = leave to the instrument (auto)
  int averages = 1;           // readings per point, averaged in linear power
};

struct CalibrationPolicy {
  bool use_short = true;            // OPEN+SHORT reference; OPEN alone when false
  double max_age_s = 8 * 3600.0;    // calibration expires after this
  int max_units = 500;              // ... or after this many units
  double max_temperature_change_c = 5.0;  // ... or this temperature change, when known
  int check_every_units = 50;       // re-measure the check standard every N units (0 = never)
  std::string check_standard = "LOAD";   // OPEN, SHORT or LOAD
  double check_drift_limit_db = 1.0;     // drift beyond this makes calibration due
  // Also measure the kit's mismatch standards (cal_kit.hpp, MismatchStandard) after the LOAD;
  // their traces are stored under their names. The kit must have some (recipe_check).
  bool use_mismatch = false;
};

// A plan point this close to a limit segment's edge is on it (judged against that segment, and
// `recipe check` counts the edge as measured): one tolerance for both.
inline constexpr double kLimitEdgeToleranceHz = 1e-3;

// Minimum return loss over a frequency range (a limit-line segment).
struct LimitSegment {
  double start_hz = 0;
  double stop_hz = 0;
  double min_return_loss_db = 0;
};

struct Limits {
  std::vector<LimitSegment> mask;
  std::optional<double> resonance_min_hz;        // resonance window, both or neither
  std::optional<double> resonance_max_hz;
  std::optional<double> min_bandwidth_hz;        // bandwidth where RL >= threshold
  double bandwidth_threshold_db = 9.5424;        // VSWR 2:1 by default
};

enum class DecisionRule { simple, guarded };

struct Trim {
  double element_length_mm = 0;
  double target_hz = 0;
};

enum class SweepMode { step, fast_capture };

// Fast capture (mode "fast-capture"): the source ramps across the band on its own while the
// receiver spans the whole plan and max-holds; one trace read returns every point. The recipe
// sets limits only; the plan (RBW, ramp, sweep times, arrangement) is chosen by
// plan_fast_capture (fast_capture_plan.hpp) for the station's instruments.
struct FastCaptureLimits {
  double max_capture_s = 10;          // longest capture the recipe accepts, s
  double min_load_margin_db = 20;     // least LOAD level above the noise floor at the chosen RBW, dB
};

// What the recipe's author expects of a good unit, for predictions only (recipe check and dry
// run): how sharp its dip is and how far production spreads its resonance. Never used to judge.
struct NominalUnit {
  std::optional<double> q;                 // loaded Q of the resonance
  std::optional<double> bandwidth_hz;      // or: width where RL >= the bandwidth threshold
  std::optional<double> depth_db;          // return loss at resonance (default: a deep dip)
  std::optional<double> resonance_sd_hz;   // production spread of the resonance (standard deviation)
  std::optional<double> center_hz;         // mean resonance; default the trim target or window centre
  // The dip's shape for the mask prediction: a series resonance (default) or a transmission-line
  // monopole (a wire element; its radiation resistance rises with frequency, its dip is flatter).
  bool line_monopole = false;
};

struct Recipe {
  std::string name;
  std::string version;
  std::string description;
  std::string content_hash;   // hex SHA-256 (or FNV) of the file bytes, set by the loader
  std::string source_path;    // file it was loaded from
  std::string source_text;    // the file's bytes (stored by hash with the runs, for offline re-judging)
  SweepMode mode = SweepMode::step;
  std::vector<Segment> segments;
  SourceSettings source;
  ReceiverSettings receiver;
  FastCaptureLimits fast_capture;     // used when mode == fast_capture
  // The offset pair (MEASUREMENT.md §12): after the direct sweep, sweep the unit again through
  // the calibration kit's offset line (the switch's DUT-OFFSET arm, or fitted by the operator
  // when prompted) and bound each point by both readings. Needs a kit with an "offset_line" and a
  // step sweep.
  bool offset_pair = false;
  CalibrationPolicy calibration;
  Limits limits;
  DecisionRule rule = DecisionRule::guarded;
  double coverage_factor = 3;   // k for the statistical terms of the budget (JCGM 100 §6.2.1)
  NominalUnit nominal;
  std::optional<Trim> trim;
  double source_match_db = 25;  // test-port match the recipe's set-up allows; the budget takes the worse of this and the fixture's
  std::map<std::string, std::vector<std::string>> setup;     // role -> raw SCPI lines
  std::map<std::string, std::vector<std::string>> teardown;  // role -> raw SCPI lines
};

// The frequencies of the whole plan, segment after segment (duplicates at joints removed).
std::vector<double> plan_frequencies(const Recipe& recipe);

const char* to_string(DecisionRule rule);

}  // namespace echoline::core
