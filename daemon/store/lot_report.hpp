// The lot report: one self-contained HTML page (inline CSS and SVG, no scripts, no external
// assets) with yield, failure Pareto, the overlay of every unit's return loss, the resonance
// histogram with Cpk, the calibrations used and the failed units. Pure; thread-safe.
#pragma once

#include <map>
#include <optional>
#include <string>
#include <string_view>
#include <vector>

#include "daemon/core/recipe.hpp"
#include "daemon/core/run_result.hpp"
#include "daemon/store/lot_recipes.hpp"

namespace echoline::store {

// Numbers the report shows, computed from the runs (exposed for tests and the client).
// A unit's "final run" is its latest finished run by started_utc (ties: later in the input
// vector), or its latest aborted run when none finished; yield as defined in yield.hpp.
struct LotStats {
  int runs = 0;
  int units = 0;
  std::map<std::string, int> runs_by_verdict;        // every verdict name present, counts of runs
  std::map<std::string, int> units_by_final_verdict; // counts of units by their final run
  std::vector<std::pair<std::string, int>> pareto;   // failure classes of final fail/inconclusive runs, descending
  double final_yield = 0;                            // yield.hpp: units whose final run passed / units with a finished run
  std::vector<double> resonances_hz;                 // final runs whose resonance lies inside the sweep
  // Final runs left out of the resonance statistics: no dip (no-response), or the return loss
  // maximum on the sweep's first or last point, where the true resonance may lie beyond it.
  int resonances_left_out = 0;
  std::optional<double> mean_hz, stddev_hz;          // sample standard deviation (n-1), n >= 2
  std::optional<double> cpk;                         // min(USL-mean, mean-LSL)/(3 sigma), needs window and sigma > 0
  std::string first_started_utc, last_started_utc;
};

// Indices into `runs` of each unit's final run, in serial order.
std::vector<std::size_t> final_runs(const std::vector<core::RunResult>& runs);
LotStats compute_lot_stats(const std::vector<core::RunResult>& runs, const core::Limits& limits);
// Final yield of `runs` (any order) by summarize_yield (yield.hpp).
double lot_final_yield(const std::vector<core::RunResult>& runs);

struct LotReportOptions {
  std::string generated_utc;   // shown in the footer when non-empty
  // The recipe versions the runs used (resolve_lot_recipes): its notes open the page, and a table
  // lists each version. Absent: the page only names the recipes in its header.
  std::optional<LotRecipes> recipes;
};

// The whole page. Every string from input (serials, reasons, names) is HTML-escaped.
// The overlay has exactly one <path class="trace ..."> per unit (its final run).
std::string build_lot_report(std::string_view lot, const std::vector<core::RunResult>& runs,
                             const std::vector<core::CalibrationRecord>& calibrations,
                             const core::Limits& limits, const LotReportOptions& options = {});

// A small stand-alone SVG of one run: RL vs frequency with its bounds band, the limit segments
// and the resonance window. Axis labels in MHz and dB.
std::string unit_trace_svg(const core::RunResult& run, const core::Limits& limits, int width = 360,
                           int height = 200);

// &, <, >, ", ' escaped for HTML text and attributes.
std::string html_escape(std::string_view text);

}  // namespace echoline::store
