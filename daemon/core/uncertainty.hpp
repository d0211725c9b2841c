// The per-point uncertainty budget of a scalar reflection measurement: built once per
// calibration from the standards' readings (including repeated readings, which measure the
// reading noise) and the calibration-kit definition, then applied to every DUT reading to give
// the interval [worst, best] the true return loss lies in. Pure; thread-safe.
// The equations, their assumptions and sources are in daemon/core/MEASUREMENT.md ("The budget").
#pragma once

#include <cstddef>
#include <map>
#include <string>
#include <vector>

#include "daemon/core/budget_types.hpp"
#include "daemon/core/cal_kit.hpp"
#include "daemon/core/recipe.hpp"
#include "daemon/core/rf_math.hpp"
#include "daemon/core/run_result.hpp"

namespace echoline::core {

// Inputs the budget needs beside the traces.
struct BudgetInputs {
  double coverage_factor = 3;
  double source_match_db = 25;
  double noise_floor_dbm = -200;
  double error_delay_s = 5e-9;     // relative delay of the error terms (fixture), for the shift bound
  double assumed_noise_db = 0.1;   // used only where no repeated readings exist (stated in warnings)
  // Fast capture: how far a reading may be from its plan frequency (the plan's bound,
  // FastCapturePlan::frequency_offset_hz); negative = half a bin of the recipe's plan.
  double frequency_offset_hz = -1;
};

// traces: "OPEN", "LOAD", optionally "SHORT", and the repeats "OPEN/repeat", "LOAD/repeat" (same
// plan). reference_dbm: the calibration's reference per point. `warnings` gets remarks (noise
// not measured, kit does not cover a frequency). REQUIRES: traces consistent with the plan
// (build_calibration checks first).
UncertaintyBudget build_budget(const Recipe& recipe, const std::map<std::string, std::vector<Reading>>& traces,
                               const std::vector<double>& reference_dbm, const CalKit& kit, const BudgetInputs& in,
                               std::vector<std::string>& warnings);

// Bounded term (dB) of a reading that may belong to a frequency up to `offset_hz` from f[i]
// (fast capture, MEASUREMENT.md §11): offset_hz times the steeper of the trace's slopes to its
// two neighbours (one at the ends). A bound wherever the trace is convex or concave over the
// neighbours (the chord-slope inequality); 0 when offset_hz is 0. REQUIRES: f increasing,
// f.size() == level_db.size(), i < f.size().
double frequency_offset_db(const std::vector<double>& f, const std::vector<double>& level_db, std::size_t i,
                           double offset_hz);
// The same for every point of a trace.
std::vector<double> frequency_offset_db(const std::vector<Reading>& trace, double offset_hz);

// The reading noise hides part of a slope: the chord slope of the true trace differs from the
// readings' by (n_j − n_i)/Δf. This is the standard uncertainty (dB) that noise adds to the
// offset term at each point: offset_hz·max over the neighbours of sqrt(σ_i² + σ_j²)/|f_j − f_i|,
// combined with the other statistical terms (root sum of squares, then the coverage factor).
// sigma_db: σ of each reading. 0 everywhere when offset_hz is 0.
std::vector<double> frequency_offset_sigma_db(const std::vector<double>& f, const std::vector<double>& sigma_db,
                                              double offset_hz);

// The bounded error of the calibration's reference, R − T ∈ [low, high] in dB (MEASUREMENT.md
// §3.2), for a kit, a frequency, a directivity bound and a source-match bound (both linear |Γ|).
// with_short: the reference is the mean of OPEN and SHORT (else the OPEN alone).
struct ReferenceErrorBounds {
  double low_db = 0, high_db = 0;
};
ReferenceErrorBounds reference_error_bounds(const CalKit& kit, double frequency_hz, bool with_short,
                                            double directivity_bound, double source_match);

// σ of one reading (dB) at level `raw_dbm` and plan point `index`: the measured high-level noise
// plus additive noise scaled from the LOAD level (or the receiver floor, whichever is larger).
double reading_sigma_db(const UncertaintyBudget& b, std::size_t index, double raw_dbm);

// The interval of the true return loss at plan point `index` for a DUT reading `raw_dbm`
// against the calibration reference `reference_dbm`. Bounded terms as a worst case, statistical
// terms at the coverage factor, added to them (daemon/core/MEASUREMENT.md). offset_db: the
// reading's frequency-offset term (frequency_offset_db; 0 for a step sweep), bounded, in dB.
// offset_sigma_db: the noise part of that term (frequency_offset_sigma_db), statistical.
ReturnLossBounds budget_bounds(const UncertaintyBudget& b, std::size_t index, double reference_dbm, double raw_dbm,
                               double offset_db = 0, double offset_sigma_db = 0);

// The error radius in |Γ| that the bounds allow around a reading: max distance from the
// measured |Γ| to either bound. Used by the resonance-shift bound.
double gamma_error_radius(const UncertaintyBudget& b, std::size_t index, double reference_dbm, double raw_dbm,
                          double offset_db = 0, double offset_sigma_db = 0);

// Named terms at one point for a report: each in the unit it is combined in.
struct BudgetTerm {
  std::string name;       // "directivity (LOAD reading)", "LOAD residual (kit)", ...
  std::string kind;       // "bounded" | "statistical"
  double value = 0;
  std::string unit;       // "|Γ|" or "dB"
};
std::vector<BudgetTerm> budget_terms(const UncertaintyBudget& b, std::size_t index, double reference_dbm,
                                     double raw_dbm, double offset_db = 0);

}  // namespace echoline::core
