// One scoring run's result: the acceptance thresholds of "Verdicts that hold on any bench"
// applied to the figures, the summary printed for a person, and every figure as JSON.
// Pure except print_report (writes to the given stream). One thread.
#pragma once

#include <cstdio>
#include <string>
#include <vector>

#include <nlohmann/json.hpp>

#include "tests/score/class_score.hpp"
#include "tests/score/mask_score.hpp"
#include "tests/score/verdict_score.hpp"
#include "tests/score/window_score.hpp"

namespace echoline::score {

struct AcceptanceCheck {
  std::string name;     // "points outside bounds"
  std::string value;    // as measured, in words and numbers
  std::string target;   // the threshold
  bool met = false;
};

// How the lot went through the station (from the operator loop).
struct StationFigures {
  int units_tested = 0;
  int results = 0;            // runs the daemon reported
  int aborted_runs = 0;
  int retries = 0;
  int calibrations = 0;
  int checks = 0;
  int daemon_exit = 0;        // exit code on SIGTERM
  double test_s = 0;          // calibrating and testing the lot
  double score_s = 0;         // truth queries and scoring
  std::vector<std::string> problems;
};

struct ScoreResult {
  std::string label, sim_config, lot_file, recipe, window_recipe;
  double directivity_db = 0;  // the simulated coupler's (from the bench config)
  StationFigures station;
  VerdictFigures verdicts;
  ClassFigures classes;
  WindowFigures window;
  MaskFigures mask;           // the mask prediction against the lot (printed; not an acceptance figure)
  std::vector<AcceptanceCheck> checks;
  bool all_met() const;
  // The safety figures only: points outside bounds, escapes, false rejects, trim advice on
  // non-length defects.
  bool safety_met() const;
};

// Thresholds: 0 points outside bounds; 0 escapes; false rejects <= 1 % of units; inconclusive
// <= 5 % of units; class accuracy >= 95 % of failed units; 0 trim advice on non-length defects;
// |predicted - observed| <= 10 percentage points for the window.
std::vector<AcceptanceCheck> acceptance(const VerdictFigures& v, const ClassFigures& c, const WindowFigures& w);

void print_report(std::FILE* out, const ScoreResult& r);
nlohmann::json report_json(const ScoreResult& r);

}  // namespace echoline::score
