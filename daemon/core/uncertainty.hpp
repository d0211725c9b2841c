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
};

// traces: "OPEN", "LOAD", optionally "SHORT", and the repeats "OPEN/repeat", "LOAD/repeat" (same
// plan). reference_dbm: the calibration's reference per point. `warnings` gets remarks (noise
// not measured, kit does not cover a frequency). REQUIRES: traces consistent with the plan
// (build_calibration checks first).
UncertaintyBudget build_budget(const Recipe& recipe, const std::map<std::string, std::vector<Reading>>& traces,
                               const std::vector<double>& reference_dbm, const CalKit& kit, const BudgetInputs& in,
                               std::vector<std::string>& warnings);

// σ of one reading (dB) at level `raw_dbm` and plan point `index`: the measured high-level noise
// plus additive noise scaled from the LOAD level (or the receiver floor, whichever is larger).
double reading_sigma_db(const UncertaintyBudget& b, std::size_t index, double raw_dbm);

// The interval of the true return loss at plan point `index` for a DUT reading `raw_dbm`
// against the calibration reference `reference_dbm`. Bounded terms as a worst case, statistical
// terms at the coverage factor, added to them (daemon/core/MEASUREMENT.md).
ReturnLossBounds budget_bounds(const UncertaintyBudget& b, std::size_t index, double reference_dbm, double raw_dbm);

// The error radius in |Γ| that the bounds allow around a reading: max distance from the
// measured |Γ| to either bound. Used by the resonance-shift bound.
double gamma_error_radius(const UncertaintyBudget& b, std::size_t index, double reference_dbm, double raw_dbm);

// Named terms at one point for a report: each in the unit it is combined in.
struct BudgetTerm {
  std::string name;       // "directivity (LOAD reading)", "LOAD residual (kit)", ...
  std::string kind;       // "bounded" | "statistical"
  double value = 0;
  std::string unit;       // "|Γ|" or "dB"
};
std::vector<BudgetTerm> budget_terms(const UncertaintyBudget& b, std::size_t index, double reference_dbm,
                                     double raw_dbm);

}  // namespace echoline::core
